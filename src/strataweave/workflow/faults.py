"""Errors that are not the program's fault, each told in one line with the exit code it earns.

2: bad input or a bad path (an InputError; a path the system refuses: missing, not a folder,
   a loop of symbolic links, a name too long).
3: a fault of the machine (disk or quota full, a file past the size limit, a read-only file
   system or folder, an input/output error, memory exhausted). Files are written under a
   temporary name and renamed, and a run is built beside its `--out` and resumes from its
   finished stages, so such a stop loses nothing.
Anything else is a fault of the program (exit 1, told by the CLI).
"""

from __future__ import annotations

import errno
import re

from joblib.externals.loky.process_executor import TerminatedWorkerError

from strataweave.errors import InputError

BAD_PATH = {errno.ENOENT, errno.ENOTDIR, errno.EISDIR, errno.ELOOP, errno.ENAMETOOLONG}
MACHINE = {
    errno.ENOSPC: "the disk is full",
    errno.EDQUOT: "the disk quota is used up",
    errno.EFBIG: "a file reached the file-size limit",
    errno.EROFS: "the file system is read-only",
    errno.EACCES: "no permission to write there (a read-only folder?)",
    errno.EPERM: "the operation is not permitted there",
    errno.EIO: "the disk reported an input/output error",
    errno.ENOMEM: "out of memory",
}
NOTHING_LOST = ("nothing was lost: inputs and finished runs are untouched and no file is half-written; "
                "run the same command again to resume from the finished stages")
LOOP = "Symlink loop from "  # how pathlib names a link loop before Python 3.13
NUMPY_SCALAR = re.compile(r"np\.(?:str_|bytes_|bool_?|u?int\d*|float\d*)\(([^()]*)\)")  # repr of NumPy >= 2


def plain_line(text: str) -> str:
    """`text` on one line, NumPy scalars shown as their values ('G1', not np.str_('G1'))."""
    return NUMPY_SCALAR.sub(r"\1", " ".join(text.split()))


def known_fault(error: BaseException) -> tuple[int, str] | None:
    """(exit code, one-line message) of bad input, a bad path or a fault of the machine; None otherwise."""
    if isinstance(error, InputError):
        return 2, plain_line(str(error))
    if isinstance(error, MemoryError):
        return 3, f"out of memory; {NOTHING_LOST}"
    if isinstance(error, TerminatedWorkerError):
        return 3, f"a worker process was killed (most often: out of memory); {NOTHING_LOST}"
    if isinstance(error, RuntimeError) and str(error).startswith(LOOP):
        return 2, f"{str(error)[len(LOOP):].strip(chr(39))}: a loop of symbolic links, expected a path to a file or folder"
    if isinstance(error, OSError) and error.errno in MACHINE:
        where = f" at {error.filename}" if error.filename else ""
        return 3, f"{MACHINE[error.errno]}{where}; {NOTHING_LOST}"
    if isinstance(error, OSError) and error.errno in BAD_PATH:
        return 2, f"{error.filename}: {error.strerror}, expected a path to an existing file or folder"
    return None
