"""The book's outside doors: the CSV column table, the CSV shift log, CSV import, merging
another laptop's book, loading the demo plant. May import: store.record, store.views and
everything below them."""
