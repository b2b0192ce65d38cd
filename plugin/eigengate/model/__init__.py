"""The model: document formats, matrix files, interconnection and the frozen Model."""
