"""One module per ``cavitas`` subcommand; each defines ``register(subparsers, **kwargs)``."""
