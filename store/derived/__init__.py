"""Rows kept beside the entries so a status is quick: the element summaries and the status
cache. Written only by store.record and by an explicit rebuild; read by store.views.
May import: store.health and everything below it."""
