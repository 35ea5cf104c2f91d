"""Fleet-level analyses over component lives."""
