"""A tqdm progress bar over the tasks of a dask computation."""

from __future__ import annotations

import sys

from dask.callbacks import Callback


class TaskProgress(Callback):
    """Show a tqdm bar counting finished dask tasks; silent when ``enabled`` is False."""

    def __init__(self, label: str, enabled: bool = True) -> None:
        super().__init__()
        self.label = label
        self.enabled = enabled
        self.bar = None

    def _start_state(self, dsk, state) -> None:
        if not self.enabled:
            return
        from tqdm import tqdm

        total = sum(len(state[k]) for k in ("ready", "waiting", "running", "finished"))
        self.bar = tqdm(total=total, desc=self.label, unit="task", file=sys.stderr, leave=False)

    def _posttask(self, key, result, dsk, state, worker_id) -> None:
        if self.bar is not None:
            self.bar.update(1)

    def _finish(self, dsk, state, errored) -> None:
        if self.bar is not None:
            self.bar.close()
            self.bar = None
