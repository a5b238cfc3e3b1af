"""Prometheus metrics of one app instance (own registry, so several apps can coexist)."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from prometheus_client import CONTENT_TYPE_LATEST, CollectorRegistry, Counter, Gauge, Histogram, generate_latest

#: the methods counted under their own name (RFC 9110 section 9 and PATCH); any other is counted as ``OTHER``
KNOWN_METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "DELETE", "CONNECT", "OPTIONS", "TRACE", "PATCH"})
OTHER_METHOD = "OTHER"
LATENCY_BUCKETS = (0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0, 60.0)


class Metrics:
    """The service's metrics.

    ``bandwise_requests_total{route,method,status}``,
    ``bandwise_request_duration_seconds{route}``,
    ``bandwise_points_processed_total``, ``bandwise_work_in_flight``,
    ``bandwise_work_waiting``, ``bandwise_workers_ready``,
    ``bandwise_requests_shed_total{reason}``,
    ``bandwise_worker_restarts_total{reason}`` (deadline, died, cancelled),
    ``bandwise_batch_slots_unfinished_total{reason}`` (batch slots answered with a problem
    instead of a result because time ran out or their worker was lost).
    """

    content_type = CONTENT_TYPE_LATEST

    def __init__(self) -> None:
        self.registry = CollectorRegistry(auto_describe=True)
        r = self.registry
        self.requests = Counter("bandwise_requests", "HTTP requests answered, by route template, method and status.", ["route", "method", "status"], registry=r)
        self.latency = Histogram("bandwise_request_duration_seconds", "Time from request start to the end of the response, by route template.", ["route"], buckets=LATENCY_BUCKETS, registry=r)
        self.points = Counter("bandwise_points_processed", "Data points taken in by successful fits and selections.", registry=r)
        self.in_flight = Gauge("bandwise_work_in_flight", "Jobs being computed by a worker right now.", registry=r)
        self.waiting = Gauge("bandwise_work_waiting", "Requests waiting for a free worker.", registry=r)
        self.workers_ready = Gauge("bandwise_workers_ready", "Worker processes up and serving.", registry=r)
        self.shed = Counter("bandwise_requests_shed", "Requests refused to protect the service, by reason.", ["reason"], registry=r)
        self.restarts = Counter("bandwise_worker_restarts", "Worker processes replaced, by reason (deadline, died).", ["reason"], registry=r)
        for reason in ("queue_full", "deadline", "rate_limited", "auth_failures", "bodies_in_flight", "draining", "not_ready"):
            self.shed.labels(reason)
        for reason in ("deadline", "died", "cancelled"):
            self.restarts.labels(reason)
        self.batch_unfinished = Counter(
            "bandwise_batch_slots_unfinished", "Batch slots answered with a problem because the deadline passed or their worker was lost, by problem type.", ["reason"], registry=r
        )
        self.batch_unfinished.labels("deadline-exceeded")
        self._latency_children: dict[str, Any] = {}
        self._request_children: dict[tuple[str, str, str], Any] = {}

    def observe_request(self, route: str, method: str, status: str, seconds: float) -> None:
        """Count one finished request (label children cached: this runs for every request).

        The label values come from a fixed set whatever the client sends: ``route``
        is a registered route template or ``unmatched``, a method outside
        :data:`KNOWN_METHODS` is counted as ``OTHER``, and ``status`` is a
        three-digit code, so no client can add series to ``/metrics``.
        """
        if method not in KNOWN_METHODS:
            method = OTHER_METHOD
        key = (route, method, status)
        child = self._request_children.get(key)
        if child is None:
            child = self._request_children[key] = self.requests.labels(route, method, status)
        child.inc()
        latency = self._latency_children.get(route)
        if latency is None:
            latency = self._latency_children[route] = self.latency.labels(route)
        latency.observe(seconds)

    def bind_pool(self, busy: Callable[[], float], waiting: Callable[[], float], ready: Callable[[], float]) -> None:
        """Read the gauges from the pool at scrape time."""
        self.in_flight.set_function(busy)
        self.waiting.set_function(waiting)
        self.workers_ready.set_function(ready)

    def on_pool_event(self, name: str, label: str) -> None:
        if name == "restart":
            self.restarts.labels(label).inc()

    def render(self) -> bytes:
        return generate_latest(self.registry)
