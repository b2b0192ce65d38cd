"""The committed baseline: store, file format and the regression rules."""
