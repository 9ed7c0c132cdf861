"""Errors the CLI reports as one line: bad input (exit 2) and faults of the environment (exit 3).

Both name the problem and what to do; neither ever loses what is already stored.
"""


class UserError(Exception):
    """Bad input (spec field, file, dimensions): the message names it and what was expected."""

    exit_code = 2


class EnvironmentFault(UserError):
    """The environment failed under a run (disk full, read-only folder, lost scheduler).

    The message says what happened, what is kept and how to resume.
    """

    exit_code = 3


class RunStopped(BaseException):
    """The driver received SIGTERM or SIGHUP: raised in the main thread like KeyboardInterrupt,
    so the run loop records the state and closes the file; ``exit_code`` is 128 + signal."""

    def __init__(self, signum: int, name: str) -> None:
        super().__init__(name)
        self.signum, self.name = signum, name
        self.exit_code = 128 + signum
