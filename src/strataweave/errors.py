"""The one exception type for bad input (see DESIGN.md, 'Errors')."""


class InputError(ValueError):
    """Bad input: the message names the file, row or column, what was found and what was expected.

    The CLI prints the message as one line and exits with status 2.
    """


class DamagedFileError(InputError):
    """A file this program wrote that no longer reads back as written (truncated, edited, checksum differs)."""

    def __init__(self, path: object, reason: str) -> None:
        self.path, self.reason = str(path), reason
        super().__init__(f"{path}: {reason}, expected the file as strataweave wrote it")
