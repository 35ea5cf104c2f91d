"""Storage: schema, engine, transactions and every SQL statement (no engineering results)."""
