"""The server tier: a central PostgreSQL store of many plants' books, `sumpbook sync` and the
fleet views. May import: store.views and everything below (it sits beside exchange/, whose
merge it calls for every row it brings into a book). psycopg is imported here only, and only
when a command needs the server: a laptop without the `server` extra works as before.
"""
