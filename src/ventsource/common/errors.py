"""The one exception type the command line turns into a one-line message."""


class InputError(ValueError):
    """Bad user input; the message is one line saying what and why."""
