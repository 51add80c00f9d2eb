"""One module per command; each exposes ``register(app)``. Commands only parse, call and print."""
