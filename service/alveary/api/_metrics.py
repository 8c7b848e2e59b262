"""Prometheus metrics (text format via prometheus-client), one registry per app.

Request counts and latency histograms per operation id are recorded by an ASGI
middleware; store and cache counters (chunk GETs, bytes read, cache hits and misses) are
read from the cubes and the chunk cache when /metrics is scraped. Series labelled with a
cube id are rendered only for the cubes the scraper may read (a private cube's only with
one of its API keys); totals over all cubes are not labelled.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterator

from prometheus_client import CollectorRegistry, Counter, Histogram, generate_latest
from prometheus_client.core import CounterMetricFamily, GaugeMetricFamily, Metric
from prometheus_client.registry import Collector
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from alveary.api._answers import AnswerCache
from alveary.cube import ChunkCache
from alveary.query import Catalog

__all__ = ["Metrics", "MetricsMiddleware"]

_BUCKETS = (0.0005, 0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 30.0)


class _StoreCollector(Collector):
    """Reads the I/O counters of the cubes and the caches at scrape time."""

    def __init__(self, catalog: Catalog, cache: ChunkCache, answers: AnswerCache) -> None:
        self._catalog = catalog
        self._cache = cache
        self._answers = answers
        self.visible: Callable[[str], bool] = _nothing

    def collect(self) -> Iterator[Metric]:
        gets = CounterMetricFamily(
            "alveary_store_chunk_reads", "Chunks read from the store (GETs).", labels=["cube"]
        )
        nbytes = CounterMetricFamily(
            "alveary_store_bytes_read", "Bytes read from the store.", labels=["cube"]
        )
        for source, cube in self._catalog.cubes():
            if cube is not None and self.visible(source.id):
                gets.add_metric([source.id], cube.stats.chunk_gets)
                nbytes.add_metric([source.id], cube.stats.bytes_read)
        yield gets
        yield nbytes
        cache = self._cache
        yield _counter("alveary_chunk_cache_hits", "Chunk cache hits.", cache.hits)
        yield _counter("alveary_chunk_cache_misses", "Chunk cache misses.", cache.misses)
        yield _gauge("alveary_chunk_cache_bytes", "Decoded bytes held in the cache.", cache.bytes)
        yield _gauge("alveary_chunk_cache_max_bytes", "Chunk cache capacity.", cache.max_bytes)
        answers = self._answers
        yield _counter("alveary_answer_cache_hits", "Answers served from the cache.", answers.hits)
        yield _counter("alveary_answer_cache_misses", "Answers computed.", answers.misses)
        yield _gauge("alveary_answer_cache_bytes", "Bytes of cached answers.", answers.bytes)


def _nothing(cube_id: str) -> bool:
    return False


def _counter(name: str, text: str, value: float) -> CounterMetricFamily:
    return CounterMetricFamily(name, text, value=value)


def _gauge(name: str, text: str, value: float) -> GaugeMetricFamily:
    return GaugeMetricFamily(name, text, value=value)


class Metrics:
    """The app's metrics and their registry."""

    def __init__(self, catalog: Catalog, cache: ChunkCache, answers: AnswerCache) -> None:
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
        self._store = _StoreCollector(catalog, cache, answers)
        self.registry.register(self._store)

    def render(self, visible: Callable[[str], bool] = _nothing) -> bytes:
        """The exposition text; per-cube series only where ``visible(cube_id)``."""
        self._store.visible = visible
        try:
            return generate_latest(self.registry)
        finally:
            self._store.visible = _nothing

    def observe(self, operation: str, status: int, seconds: float) -> None:
        self.requests.labels(operation, str(status)).inc()
        self.latency.labels(operation).observe(seconds)


class MetricsMiddleware:
    """ASGI middleware: count and time each request under its route's operation id."""

    def __init__(self, app: ASGIApp, metrics: Metrics) -> None:
        self.app = app
        self.metrics = metrics

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        start = time.perf_counter()
        status = 500

        async def send_wrapper(message: Message) -> None:
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
