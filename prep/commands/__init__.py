"""One module per CLI command; each defines ``HELP``, ``add_arguments(parser)`` and ``run(args, ctx) -> int``."""
