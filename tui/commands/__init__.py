"""One module per group of command-line commands; each exposes ``register(main)``."""
