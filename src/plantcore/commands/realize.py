"""The ``plantcore realize`` command (being written; registers nothing yet)."""


def register(subparsers):
    """Add the subparser and return its handler; None while the command is not written."""
    return None
