"""The one exception type that the command line turns into a one-line message."""


class InputError(Exception):
    """Bad input or a refused request, explained in one line for the user.

    The CLI prints ``coilshift: error: <message>`` on stderr and exits non-zero,
    without a traceback. The message should name the file and the problem.
    """
