"""One module per command: ``configure(parser)`` and ``run(args) -> int``."""
