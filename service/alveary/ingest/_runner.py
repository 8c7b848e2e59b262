"""Running build tasks on dask: local threads, or a dask.distributed cluster."""

from __future__ import annotations

import sys
from collections.abc import Sequence
from typing import Any

from alveary._errors import IngestError
from alveary.ingest._tasks import Task, TaskResult, run_task

__all__ = ["Runner"]


class Runner:
    """Runs tasks on local threads, or on the dask scheduler at ``scheduler``.

    An unreachable scheduler fails here, before anything is written.
    """

    def __init__(self, scheduler: str | None, progress: bool) -> None:
        self.client: Any = None
        self.progress = progress
        if scheduler:
            import distributed

            lib: Any = distributed  # untyped
            try:
                self.client = lib.Client(scheduler, timeout="10s", set_as_default=False)
            except (OSError, TimeoutError, ValueError) as exc:
                raise IngestError(
                    "scheduler", scheduler, f"the address of a running dask scheduler ({exc})"
                ) from None

    def close(self) -> None:
        if self.client is not None:
            self.client.close()

    def run(self, tasks: Sequence[Task], label: str) -> list[TaskResult]:
        if not tasks:
            return []
        bar = None
        if self.progress:
            from tqdm import tqdm

            bar = tqdm(total=len(tasks), desc=label, unit="chunk", file=sys.stderr, leave=False)
        try:
            if self.client is None:
                return self._threads(tasks, bar)
            return self._distributed(tasks, bar)
        finally:
            if bar is not None:
                bar.close()

    def _threads(self, tasks: Sequence[Task], bar: Any) -> list[TaskResult]:
        import dask
        from dask.callbacks import Callback

        lib: Any = dask  # untyped
        delayed = [lib.delayed(run_task, pure=False)(t) for t in tasks]

        def tick(key: Any, result: Any, dsk: Any, state: Any, worker: Any) -> None:
            if bar is not None and isinstance(result, TaskResult):
                bar.update(1)

        callback: Any = Callback
        with callback(posttask=tick):
            return list(lib.compute(*delayed, scheduler="threads"))

    def _distributed(self, tasks: Sequence[Task], bar: Any) -> list[TaskResult]:
        import distributed

        lib: Any = distributed  # untyped
        futures = [self.client.submit(run_task, t, pure=False) for t in tasks]
        results = []
        for fut in lib.as_completed(futures, loop=self.client.loop):
            results.append(fut.result())
            if bar is not None:
                bar.update(1)
        return results
