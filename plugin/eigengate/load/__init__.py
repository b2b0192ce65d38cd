"""Loading model files into Models, with the requirements and waivers they declare."""
