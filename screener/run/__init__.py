"""Running many structures: the batch runner and its SQLite result store."""
