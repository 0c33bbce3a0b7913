"""The finished resample tasks of an unfinished sweep, kept in the stage cache's work folder.

Each resample task that finishes is written at once (a checked JSON + `.npz` pair named by
its position and seed), so a sweep interrupted after hours resumes with the resamples left.
A resumed sweep reads back exactly the labels it would have computed, so its results are
byte for byte those of an uninterrupted one. The full-data fits, one per count, are cheap
beside the resamples and are computed again.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path

from strataweave.errors import DamagedFileError
from strataweave.files import read_checked, write_checked
from strataweave.subtypes.tasks import ResampleFit, fit_resample


class ResampleCheckpoint:
    """Finished `fit_resample` tasks in `folder`; other tasks pass through unkept."""

    def __init__(self, folder: Path, notice: Callable[[str], None]) -> None:
        self.folder, self.notice = Path(folder), notice

    def _paths(self, task: tuple[int, int]) -> tuple[Path, Path]:
        stem = self.folder / f"resample-{task[0]}-{task[1]}"
        return stem.with_suffix(".json"), stem.with_suffix(".npz")

    def finished(self, function: Callable, task_params: Sequence[tuple[int, int]]) -> dict[int, ResampleFit]:
        """The resamples already kept, by position; a damaged one is left to run again, with a notice."""
        if function is not fit_resample:
            return {}
        kept = {}
        for position, task in enumerate(task_params):
            json_path, npz_path = self._paths(task)
            if not json_path.is_file():
                continue
            try:
                record, arrays = read_checked(json_path, npz_path)
                kept[position] = ResampleFit(arrays["labels"], int(record["unconverged"]))
            except DamagedFileError as damage:
                self.notice(f"{damage.path}: {damage.reason}; running that resample again")
            except (KeyError, TypeError, ValueError) as damage:
                self.notice(f"{json_path}: lacks or garbles {damage}; running that resample again")
        if kept:
            self.notice(f"sweep: {len(kept)} of {len(task_params)} resamples already finished, resuming after them")
        return kept

    def keep(self, function: Callable, params: tuple[int, int], result: ResampleFit) -> None:
        if function is fit_resample:
            json_path, npz_path = self._paths(params)
            write_checked(json_path, npz_path, {"unconverged": int(result.unconverged)}, {"labels": result.labels})
