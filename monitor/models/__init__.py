"""Numerical models: numpy in, numpy out; no files, no database."""
