"""The one exception type for problems a user can fix (bad input, bad settings)."""


class FramestyleError(Exception):
    """A user-facing problem. The message names the file (if any) and what is wrong.

    The CLI prints it as one line on stderr and exits with code 2; library code raises it
    at its input checks instead of letting a traceback escape.
    """
