"""Worker side: runs in the worker processes, parses and validates a job, calls ``estimators``, encodes the answer.

Never imports the HTTP side; shares only :mod:`service.contract` with it.
:mod:`service.worker.entry` stays light (no numpy): the composition root
imports it to name the entry point, and the forkserver preloads the heavy modules.
"""
