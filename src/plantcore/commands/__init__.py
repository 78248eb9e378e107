"""Subcommands that live in modules of their own, above the library and the reports.

Each module here has ``register(subparsers) -> handler | None``: it adds its subparser
(with ``parser_class`` inherited from ``subparsers``) and returns the function that runs it,
``handler(args) -> exit code``.  :mod:`plantcore.cli` calls them in the order of
:data:`COMMAND_MODULES` and handles errors and exit codes for all commands alike.
"""

COMMAND_MODULES = ("suggest", "realize", "plate")
