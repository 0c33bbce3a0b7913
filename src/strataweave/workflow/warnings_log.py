"""Warnings of the libraries a run uses, kept out of the terminal: counted, written to warnings.log.

NumPy, scikit-learn, pandas and friends warn about things a user of the run cannot act on
while the bars are drawn (a division by zero in a filtered-out feature, a fit that stopped
at its iteration limit). A run collects them, writes one line per distinct warning with how
often it came to `warnings.log` in the run folder, and says so in one line at the end.
"""

from __future__ import annotations

import warnings
from collections import Counter
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from strataweave.caution import CAUTION
from strataweave.files import atomic_write_text

LOG = "warnings.log"


@contextmanager
def collected_warnings() -> Iterator[Counter]:
    """Every warning raised inside the block, counted by (category, message, where), none shown."""
    counts: Counter = Counter()

    def count(message, category, filename, lineno, file=None, line=None) -> None:
        counts[(category.__name__, " ".join(str(message).split()), f"{filename}:{lineno}")] += 1

    with warnings.catch_warnings():
        warnings.simplefilter("always")
        warnings.showwarning = count
        yield counts


def write_warnings_log(folder: Path, counts: Counter) -> str | None:
    """`folder`/warnings.log, most frequent first, and the line that tells of it; None when nothing warned."""
    if not counts:
        return None
    lines = [f"# {CAUTION}", "# count\tcategory\tmessage\twhere"]
    lines += [f"{n}\t{category}\t{message}\t{where}" for (category, message, where), n in counts.most_common()]
    atomic_write_text(Path(folder) / LOG, "\n".join(lines) + "\n")
    kinds = Counter(category for category, _, _ in counts.elements())
    named = ", ".join(f"{n} {category}" for category, n in kinds.most_common())
    total = sum(counts.values())
    return f"{total} library warning{'' if total == 1 else 's'} ({named}) written to {LOG}, not shown"
