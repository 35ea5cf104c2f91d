"""The damage ledger: life-model results per upload (pure; the store writes them)."""
