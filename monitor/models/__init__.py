"""Life and reliability models: numpy/scipy only, no I/O."""
