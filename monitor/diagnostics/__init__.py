"""Raw diagnostic signals turned into readings."""
