"""Plain record types shared by every layer (canonical units)."""
