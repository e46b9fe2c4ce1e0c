"""The one exception type the command line turns into a one-line message and exit status 2."""


class VectorgenError(Exception):
    """Bad input or an impossible request, explained in one line for the user."""
