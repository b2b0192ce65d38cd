"""The pytest front end: plugin wiring, model-file items, the fixture's assertions, summary."""
