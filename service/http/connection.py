"""Connection-level timeouts the server itself lacks: request headers and sending.

uvicorn closes a keep-alive connection that stays idle between requests
(``BANDWISE_IDLE_TIMEOUT_SECONDS``, its keep-alive timeout), but not a
connection that sends nothing or only part of its headers, nor one whose
client never reads the answer (the answer then sits in the process's
memory for as long as the client stays connected).  The HTTP/1.1 protocol
class made by :func:`guarded_protocol` adds both:

- a header timeout, from the connection's start or the first byte of each
  request until its header section is complete; past it the connection is
  closed;
- a send timeout, while the client's socket does not take data (the write
  buffer above its high-water mark); past it the connection is aborted, its
  buffered answer dropped, and the request ends as a client disconnect.
"""

from __future__ import annotations

import asyncio
from typing import Any

import h11
from uvicorn.protocols.http.h11_impl import H11Protocol


class _GuardedH11Protocol(H11Protocol):
    header_timeout = 10.0
    send_timeout = 30.0

    def connection_made(self, transport: asyncio.Transport) -> None:  # type: ignore[override]
        self._header_timer: asyncio.TimerHandle | None = None
        self._send_timer: asyncio.TimerHandle | None = None
        super().connection_made(transport)
        self._arm_header_timer()

    def connection_lost(self, exc: Exception | None) -> None:
        self._cancel_header_timer()
        self._cancel_send_timer()
        super().connection_lost(exc)

    def data_received(self, data: bytes) -> None:
        if self.conn.their_state is h11.IDLE:
            self._arm_header_timer()  # a new request has begun (or goes on arriving)
        super().data_received(data)
        if self.conn.their_state is not h11.IDLE:
            self._cancel_header_timer()

    def on_response_complete(self) -> None:
        super().on_response_complete()
        if self.conn.their_state is not h11.IDLE:
            self._cancel_header_timer()

    def pause_writing(self) -> None:
        super().pause_writing()
        if self._send_timer is None:
            self._send_timer = self.loop.call_later(self.send_timeout, self._send_expired)

    def resume_writing(self) -> None:
        self._cancel_send_timer()
        super().resume_writing()

    # ----------------------------------------------------------------- timers

    def _arm_header_timer(self) -> None:
        if self._header_timer is None:
            self._header_timer = self.loop.call_later(self.header_timeout, self._header_expired)

    def _cancel_header_timer(self) -> None:
        if self._header_timer is not None:
            self._header_timer.cancel()
            self._header_timer = None

    def _cancel_send_timer(self) -> None:
        if self._send_timer is not None:
            self._send_timer.cancel()
            self._send_timer = None

    def _header_expired(self) -> None:
        self._header_timer = None
        if self.conn.their_state is h11.IDLE and not self.transport.is_closing():
            self.transport.close()

    def _send_expired(self) -> None:
        self._send_timer = None
        self.transport.abort()  # drops the unsent answer; connection_lost ends the request as a disconnect


def guarded_protocol(header_timeout: float, send_timeout: float) -> type[Any]:
    """An HTTP/1.1 protocol class for uvicorn with these header and send timeouts (seconds)."""
    return type("BandwiseH11Protocol", (_GuardedH11Protocol,), {"header_timeout": header_timeout, "send_timeout": send_timeout})
