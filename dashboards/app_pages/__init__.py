"""The dashboard pages, one short script each."""
