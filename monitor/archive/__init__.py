"""The shot archive: a per-shot summary (a pure function of file and config), its SQLite catalogue, queries and trends."""
