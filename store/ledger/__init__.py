"""What was logged: entry kinds, the plant register, validating, writing and reading entries.
Writes here touch only their own rows (store.record keeps the derived rows with them).
May import: store.db, store.physics, store.base."""
