"""Subcommands of the command line. Each module has `register(subparsers)`; the parser calls `args.run(args)`."""

COMMANDS = ("check", "fix", "serve", "explain", "merge")
