"""The worker side's entry point as the pool needs it: the target of a new process and the modules to preload."""

from service.contract.jobs import WorkerEntry
from service.worker.main import worker_main

WORKER_ENTRY = WorkerEntry(worker_main, ("service.worker.main", "service.worker.handlers", "service.worker.warmup"))
