"""Rules: the catalogue, requirements, known modes, waivers, requirement parsing, findings."""
