"""The one exception type for bad input (see DESIGN.md, 'Errors')."""


class InputError(ValueError):
    """Bad input: the message names the file, row or column, what was found and what was expected.

    The CLI prints the message as one line and exits with status 2.
    """
