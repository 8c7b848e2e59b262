"""Prometheus metrics (text format via prometheus-client), one registry per app.

Request counts and latency histograms per operation id are recorded by an ASGI
middleware; store and cache counters (chunk GETs, bytes read, cache hits and misses) are
read from the cubes and the chunk cache when /metrics is scraped.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from typing import Any

from prometheus_client import CollectorRegistry, Counter, Histogram, generate_latest
from prometheus_client.core import CounterMetricFamily, GaugeMetricFamily

__all__ = ["Metrics", "MetricsMiddleware"]

_BUCKETS = (0.0005, 0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 30.0)


def _counter(obj: Any, *names: str) -> float:
    """The first of ``names`` that ``obj`` has (attribute or key), as a number."""
    for name in names:
        value = obj.get(name) if isinstance(obj, dict) else getattr(obj, name, None)
        if value is not None:
            return float(value)
    return 0.0


class _StoreCollector:
    """Reads I/O counters of the cubes and the chunk cache at scrape time."""

    def __init__(
        self,
        cubes: Callable[[], list[tuple[str, Any]]],
        cache: Callable[[], Any],
        answers: Callable[[], Any],
    ):
        self._cubes = cubes
        self._cache = cache
        self._answers = answers

    def collect(self):
        gets = CounterMetricFamily(
            "alveary_store_chunk_reads", "Chunks read from the store (GETs).", labels=["cube"]
        )
        nbytes = CounterMetricFamily(
            "alveary_store_bytes_read", "Bytes read from the store.", labels=["cube"]
        )
        for cube_id, cube in self._cubes():
            stats = getattr(cube, "stats", None) if cube is not None else None
            if stats is None:
                continue
            gets.add_metric(
                [cube_id], _counter(stats, "chunk_gets", "gets", "chunk_reads", "reads")
            )
            nbytes.add_metric([cube_id], _counter(stats, "bytes_read", "nbytes", "bytes"))
        yield gets
        yield nbytes
        cache = self._cache()
        hits = CounterMetricFamily("alveary_chunk_cache_hits", "Chunk cache hits.")
        misses = CounterMetricFamily("alveary_chunk_cache_misses", "Chunk cache misses.")
        held = GaugeMetricFamily("alveary_chunk_cache_bytes", "Decoded bytes held in the cache.")
        limit = GaugeMetricFamily("alveary_chunk_cache_max_bytes", "Chunk cache capacity.")
        if cache is not None:
            hits.add_metric([], _counter(cache, "hits"))
            misses.add_metric([], _counter(cache, "misses"))
            held.add_metric([], _counter(cache, "bytes", "nbytes", "size"))
            limit.add_metric([], _counter(cache, "max_bytes", "capacity"))
        yield hits
        yield misses
        yield held
        yield limit
        answers = self._answers()
        a_hits = CounterMetricFamily("alveary_answer_cache_hits", "Answers served from the cache.")
        a_miss = CounterMetricFamily("alveary_answer_cache_misses", "Answers computed.")
        a_held = GaugeMetricFamily("alveary_answer_cache_bytes", "Bytes of cached answers.")
        if answers is not None:
            a_hits.add_metric([], _counter(answers, "hits"))
            a_miss.add_metric([], _counter(answers, "misses"))
            a_held.add_metric([], _counter(answers, "bytes"))
        yield a_hits
        yield a_miss
        yield a_held


class Metrics:
    """The app's metrics and their registry."""

    def __init__(
        self,
        cubes: Callable[[], list[tuple[str, Any]]],
        cache: Callable[[], Any],
        answers: Callable[[], Any] = lambda: None,
    ):
        self.registry = CollectorRegistry(auto_describe=True)
        self.requests = Counter(
            "alveary_requests",
            "HTTP requests by operation and status.",
            ["operation", "status"],
            registry=self.registry,
        )
        self.latency = Histogram(
            "alveary_request_seconds",
            "Request latency by operation.",
            ["operation"],
            buckets=_BUCKETS,
            registry=self.registry,
        )
        self.registry.register(_StoreCollector(cubes, cache, answers))

    def render(self) -> bytes:
        return generate_latest(self.registry)

    def observe(self, operation: str, status: int, seconds: float) -> None:
        self.requests.labels(operation, str(status)).inc()
        self.latency.labels(operation).observe(seconds)


class MetricsMiddleware:
    """ASGI middleware: count and time each request under its route's operation id."""

    def __init__(self, app: Any, metrics: Metrics) -> None:
        self.app = app
        self.metrics = metrics

    async def __call__(self, scope: dict, receive: Callable, send: Callable) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        start = time.perf_counter()
        status = 500

        async def send_wrapper(message: dict) -> None:
            nonlocal status
            if message["type"] == "http.response.start":
                status = message["status"]
            await send(message)

        try:
            await self.app(scope, receive, send_wrapper)
        finally:
            route = scope.get("route")
            operation = scope.get("alveary.operation") or getattr(route, "operation_id", None)
            self.metrics.observe(operation or "unmatched", status, time.perf_counter() - start)
