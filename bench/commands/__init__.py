"""One module per command: each has ``add_parser(subparsers)`` and ``run(args) -> int``."""
