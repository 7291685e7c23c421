"""Each filter's, breather's and unit's state worked out from the ledger: operating
conditions, elements and their lives, fluid care, the status model (due dates, flags).
Reads only. May import: store.ledger and everything below it, store.forecast."""
