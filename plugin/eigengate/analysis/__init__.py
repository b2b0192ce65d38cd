"""Analysis of a model: modes and spectrum, equilibria, margins, vector fields, mode matching."""
