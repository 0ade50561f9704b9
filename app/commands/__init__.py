"""One module per ``upstroke`` subcommand: ``add_parser(subparsers)`` and ``run(args)``."""
