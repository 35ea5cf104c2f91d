"""Physical models: pure numpy/scipy functions, one module per domain; no I/O, no database."""
