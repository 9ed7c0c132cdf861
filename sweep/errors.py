"""Errors a user can fix: printed as one line by the CLI, exit code 2."""


class UserError(Exception):
    """Bad input (spec field, file, dimensions): the message names it and what was expected."""
