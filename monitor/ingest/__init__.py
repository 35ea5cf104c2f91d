"""Readers: a file-like object in, validated records and problems out; no database."""
