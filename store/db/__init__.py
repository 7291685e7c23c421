"""The SQLite file: schema and migrations, opening and locking the book, backups.
May import: store.base."""
