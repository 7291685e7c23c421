"""The store: maths against outside references, the book file, the ledger, exports."""
