"""The one error type that reaches a user as a single line."""


class NbledgerError(Exception):
    """A problem with the user's input or files, told in one line.

    The command line prints ``error: <message>`` and exits non-zero; the library
    raises it so that callers can catch one type.
    """
