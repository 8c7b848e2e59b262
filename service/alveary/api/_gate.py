"""A per-process limit on the work of large answers in flight, weighted by planned cells.

Every answer holds its result and one encoded block in memory while it is read and sent,
about 8 bytes per (zone, time step, variable) cell plus the block. :class:`CellGate` lets
requests in while the cells in flight stay within a capacity; a request that does not fit
waits (first come, first served) for up to ``wait`` seconds, then is refused with
:class:`Busy` (HTTP 503 with ``Retry-After``). Small requests (under ``small`` cells) pass
without waiting, so points and short series never queue behind heavy polygons.
"""

from __future__ import annotations

import asyncio
import collections
import contextlib
from collections.abc import AsyncIterator

__all__ = ["Busy", "CellGate"]


class Busy(Exception):
    """The process has too much large work in flight; retry later."""


class CellGate:
    """A weighted semaphore of ``capacity`` cells, FIFO, with a bounded wait.

    Examples
    --------
    >>> import asyncio
    >>> gate = CellGate(100, wait=0.01, small=1)
    >>> async def two():
    ...     async with gate.hold(80):
    ...         try:
    ...             async with gate.hold(30):
    ...                 return "both"
    ...         except Busy:
    ...             return f"second refused, {gate.in_use} in use"
    >>> asyncio.run(two())
    'second refused, 80 in use'
    """

    def __init__(self, capacity: int, wait: float, small: int = 0) -> None:
        self.capacity = max(1, int(capacity))
        self.wait = float(wait)
        self.small = int(small)
        self.in_use = 0
        self.refused = 0
        self._waiters: collections.deque[tuple[int, asyncio.Future[None]]] = collections.deque()

    def _fits(self, weight: int) -> bool:
        return self.in_use + weight <= self.capacity

    async def acquire(self, cells: int) -> int:
        """Take ``cells`` (capped at the capacity); returns the weight to release."""
        if cells < self.small:
            return 0
        weight = min(int(cells), self.capacity)
        if not self._waiters and self._fits(weight):
            self.in_use += weight
            return weight
        future: asyncio.Future[None] = asyncio.get_running_loop().create_future()
        entry = (weight, future)
        self._waiters.append(entry)
        try:
            await asyncio.wait_for(asyncio.shield(future), self.wait)
        except BaseException as exc:  # timed out, or the request was cancelled
            if future.done():  # granted meanwhile
                if isinstance(exc, TimeoutError):
                    return weight
                self.release(weight)
                raise
            self._waiters.remove(entry)
            future.cancel()
            self._wake()
            if isinstance(exc, TimeoutError):
                self.refused += 1
                raise Busy from None
            raise
        return weight

    def release(self, weight: int) -> None:
        if weight:
            self.in_use -= weight
            self._wake()

    def _wake(self) -> None:
        while self._waiters and self._fits(self._waiters[0][0]):
            weight, future = self._waiters.popleft()
            if future.done():
                continue
            self.in_use += weight
            future.set_result(None)

    @contextlib.asynccontextmanager
    async def hold(self, cells: int) -> AsyncIterator[int]:
        weight = await self.acquire(cells)
        try:
            yield weight
        finally:
            self.release(weight)
