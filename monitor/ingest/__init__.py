"""Files to validated records plus problems: parsing, units, checks within a file; no database."""
