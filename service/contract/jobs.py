"""Messages between the HTTP process and the worker processes.

Kept free of numpy and web imports: both sides import it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from multiprocessing.connection import Connection
from typing import Any

JOB_KINDS = ("smooth", "batch", "bandwidth", "kernels", "demo_list", "demo", "ping", "batch_plan")


@dataclass(frozen=True)
class Job:
    """One unit of numerical work.

    Attributes
    ----------
    kind : str
        One of :data:`JOB_KINDS`.
    body : bytes
        Raw request body (JSON), parsed and validated in the worker.
    request_id : str
        For log lines and problem documents.
    path : str
        Request path, used as the problem ``instance``.
    params : dict
        Path parameters (e.g. the demo name).
    accept_gzip : bool
        Whether the client accepts a gzip-encoded answer.
    content_type : str
        Media type of ``body``: ``application/json`` or an Arrow IPC stream
        (see :mod:`service.contract.arrow_layout`).
    accept_arrow : bool
        Whether the client asked for the answer as an Arrow IPC stream.
    """

    kind: str
    body: bytes = b""
    request_id: str = ""
    path: str = ""
    params: dict[str, Any] = field(default_factory=dict)
    accept_gzip: bool = False
    content_type: str = "application/json"
    accept_arrow: bool = False


@dataclass(frozen=True)
class Outcome:
    """The finished answer for one job.

    Attributes
    ----------
    status : int
        HTTP status.
    body : bytes
        Serialised body (possibly gzip-compressed, see ``encoding``).
    media_type : str
        ``application/json`` or ``application/problem+json``.
    encoding : str or None
        ``"gzip"`` when ``body`` is compressed.
    points : int
        Data points processed (for logs and metrics).
    problem : str or None
        Problem slug when the answer is an error.
    seconds : float
        Time the worker spent on the job.
    unfinished : int
        Batch slots not started before the batch's deadline (marked deadline-exceeded).
    listed : int
        Data points listed over all slots of a batch job (for the whole batch's point limit).
    """

    status: int
    body: bytes
    media_type: str = "application/json"
    encoding: str | None = None
    points: int = 0
    problem: str | None = None
    seconds: float = 0.0
    unfinished: int = 0
    listed: int = 0


@dataclass(frozen=True)
class WorkerEntry:
    """How the HTTP process starts a worker, without importing the worker side.

    The composition root (:func:`service.app.create_app`) hands the worker
    side's entry to the pool; the pool only calls ``target`` in a new process.

    Attributes
    ----------
    target : callable
        ``target(conn, config)`` serves jobs on ``conn`` until it closes.
    preload : tuple of str
        Modules the forkserver imports once, so forked workers start warm.
    """

    target: Callable[[Connection, dict[str, Any]], None]
    preload: tuple[str, ...] = ()
