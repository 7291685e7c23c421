"""What every part of the app shares and that imports no other part of it: key bindings,
quantities in the user's units, plain-text rendering, background reads, and the shape of
the app as screens and forms see it (`host.Host`)."""
