"""Stop the work of a request whose client has gone away.

While a request waits for a worker or its worker computes, nothing reads
from the connection, so a client that disconnects would go unnoticed until
the answer is written, and its job would hold a worker to the end or to the
deadline.  :class:`DisconnectWatch` listens for the server's
``http.disconnect`` message meanwhile and, when it comes, cancels the
request's task: the pool then drops the waiting job or kills and replaces the
worker computing it (it is started again from the warm fork server in
milliseconds), and the request ends as :class:`ClientDisconnect`, which the
access log and the metrics record as 499.
"""

from __future__ import annotations

import asyncio
from types import TracebackType

from starlette.requests import ClientDisconnect
from starlette.types import Receive


class DisconnectWatch:
    """``async with DisconnectWatch(receive): ...`` cancels the body when the client disconnects.

    Use it only once the request body has been read: it consumes (and drops)
    whatever the client still sends.
    """

    def __init__(self, receive: Receive) -> None:
        self._receive = receive
        self._gone = False
        self._owner: asyncio.Task[object] | None = None
        self._watcher: asyncio.Task[None] | None = None

    async def _watch(self) -> None:
        while True:
            message = await self._receive()
            if message["type"] == "http.disconnect":
                self._gone = True
                if self._owner is not None:
                    self._owner.cancel()
                return

    async def __aenter__(self) -> DisconnectWatch:
        self._owner = asyncio.current_task()
        self._watcher = asyncio.create_task(self._watch())
        return self

    async def __aexit__(self, kind: type[BaseException] | None, exc: BaseException | None, tb: TracebackType | None) -> None:
        if self._watcher is not None and not self._watcher.done():
            self._watcher.cancel()
        if self._gone and kind is not None and issubclass(kind, asyncio.CancelledError):
            assert self._owner is not None
            self._owner.uncancel()
            raise ClientDisconnect() from None
