"""Progress bars (tqdm, on stderr) and stage messages for the terminal.

The numeric layers accept an optional `progress` callable, called with the number of
finished tasks so far; `Feedback.bar` hands out such callables wired to a tqdm bar.
"""

from __future__ import annotations

import sys
from contextlib import contextmanager
from typing import Callable, Iterator

from tqdm import tqdm

QUIET, NORMAL, VERBOSE = 0, 1, 2


class Feedback:
    """What the user sees on stderr: bars at NORMAL and above, stage lines at VERBOSE."""

    def __init__(self, level: int = NORMAL, stream=None) -> None:
        self.level = level
        self.stream = stream if stream is not None else sys.stderr

    def say(self, message: str) -> None:
        """A line shown unless quiet."""
        if self.level >= NORMAL:
            print(message, file=self.stream, flush=True)

    def detail(self, message: str) -> None:
        """A line shown only when verbose."""
        if self.level >= VERBOSE:
            print(message, file=self.stream, flush=True)

    @contextmanager
    def bar(self, description: str, total: int | None) -> Iterator[Callable[[int], None]]:
        """A `progress(done)` callable for a loop of `total` tasks, drawn as a tqdm bar."""
        if self.level < NORMAL:
            yield lambda done: None
            return
        with tqdm(total=total, desc=description, file=self.stream, leave=False, unit="task") as shown:

            def progress(done: int) -> None:
                shown.update(done - shown.n)

            yield progress
