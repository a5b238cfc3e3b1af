"""Command line: ``bandwise serve [--host H] [--port P] [--workers N]`` (also ``python -m service``).

Shutdown is graceful: the first SIGTERM (or Ctrl+C) turns ``/readyz`` to 503
at once and refuses new work with 503, while requests already in flight may
finish for up to ``BANDWISE_DRAIN_SECONDS``; then the process exits with
status 0.  A second Ctrl+C stops at once.
"""

from __future__ import annotations

import argparse
import logging
import os
import signal
import socket
import sys
import time
from types import FrameType
from typing import Any

from service import __version__

log = logging.getLogger("bandwise.cli")
#: seconds after the drain time for the requests cut off to be answered before the server stops
_CUT_OFF_GRACE = 1.0


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="bandwise", description="Bandwise kernel-smoothing service.")
    sub = parser.add_subparsers(dest="command")
    serve = sub.add_parser("serve", help="run the HTTP service (the default command)")
    _add_serve_flags(serve)
    parser.add_argument("--version", action="version", version=f"bandwise {__version__}")
    return parser


def _add_serve_flags(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--host", default=None, help="address to bind (default 127.0.0.1, or BANDWISE_HOST)")
    parser.add_argument("--port", type=int, default=None, help="TCP port (default 8000, or BANDWISE_PORT; 0 picks a free port)")
    parser.add_argument("--workers", type=int, default=None, help="worker processes for the numerical work (default: number of cores, or BANDWISE_WORKERS)")
    parser.add_argument("--log-level", default=None, help="debug, info, warning or error (default info, or BANDWISE_LOG_LEVEL)")


def _bind(host: str, port: int) -> socket.socket:
    """A listening TCP socket on ``host:port`` (port 0: any free port).

    Created with ``IPPROTO_TCP`` and ``TCP_NODELAY``: asyncio only turns Nagle's
    algorithm off on accepted sockets whose protocol number says TCP, and with
    it on, a response written as headers then body waits for the client's
    delayed ACK (about 40 ms) on every keep-alive request.
    """
    family = socket.AF_INET6 if ":" in host else socket.AF_INET
    sock = socket.socket(family, socket.SOCK_STREAM, socket.IPPROTO_TCP)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
    sock.bind((host, port))
    sock.listen(2048)
    sock.set_inheritable(True)
    return sock


def _url(host: str, port: int) -> str:
    shown = "127.0.0.1" if host in ("0.0.0.0", "") else host
    if ":" in shown:
        shown = f"[{shown}]"
    return f"http://{shown}:{port}"


def serve(overrides: dict[str, Any]) -> int:
    """Run the service until it is told to stop; return the exit status."""
    import uvicorn
    from pydantic import ValidationError

    from service.app import create_app
    from service.http.connection import guarded_protocol
    from service.runtime.allocator import tune_allocator
    from service.runtime.logs import configure_logging, uvicorn_log_config
    from service.runtime.settings import Settings, describe_errors, unknown_variables

    try:
        settings = Settings(**{k: v for k, v in overrides.items() if v is not None})
    except ValidationError as exc:
        for line in describe_errors(exc):
            print(f"bandwise: {line}", file=sys.stderr)
        return 2
    configure_logging(settings.log_level)
    tune_allocator()  # the HTTP process holds every request body a few times over (workers do the same for themselves)
    for name, close in unknown_variables(os.environ):
        hint = f"; did you mean {close}?" if close else ""
        log.warning(f"{name} is not a Bandwise setting and is ignored{hint}", extra={"fields": {"variable": name, "did_you_mean": close}})
    try:
        sock = _bind(settings.host, settings.port)
    except OSError as exc:
        print(f"bandwise: cannot listen on {settings.host}:{settings.port}: {exc.strerror or exc}", file=sys.stderr)
        return 1
    app = create_app(settings)
    service = app.state.service
    port = sock.getsockname()[1]
    config = uvicorn.Config(
        app,
        log_config=uvicorn_log_config(settings.log_level),
        access_log=False,
        lifespan="on",
        timeout_graceful_shutdown=max(1, int(settings.drain_seconds + _CUT_OFF_GRACE) + 1),
        server_header=False,
        http=guarded_protocol(settings.header_timeout_seconds, settings.send_timeout_seconds),
        timeout_keep_alive=max(1, round(settings.idle_timeout_seconds)),
        # forwarded headers are believed only from configured proxies (none by default)
        proxy_headers=bool(settings.trusted_proxies),
        forwarded_allow_ips=list(settings.trusted_proxies) or None,
    )

    class DrainingServer(uvicorn.Server):
        """uvicorn server that drains on SIGTERM/SIGINT before stopping, and exits 0."""

        def handle_exit(self, sig: int, frame: FrameType | None) -> None:
            if service.draining:
                if sig == signal.SIGINT:
                    self.force_exit = True
                self.should_exit = True
                return
            service.begin_drain()

        async def on_tick(self, counter: int) -> bool:
            if service.draining and not self.should_exit:
                elapsed = time.monotonic() - (service.drain_started or time.monotonic())
                if service.counters.active_api == 0 or elapsed >= settings.drain_seconds + _CUT_OFF_GRACE:
                    self.should_exit = True
                elif elapsed >= settings.drain_seconds and not service.pool.closed:
                    # out of drain time: stop the workers, so each request still in flight is
                    # answered with a 503 problem (shutting-down, Retry-After) before the exit
                    await service.pool.close()
            return await super().on_tick(counter)

    server = DrainingServer(config)
    base = _url(settings.host, port)
    print(f"Bandwise {__version__} listening on {base} ({settings.workers} worker processes)", flush=True)
    print(f"  demo page: {base}/", flush=True)
    print(f"  API docs:  {base}/docs", flush=True)
    server.run(sockets=[sock])
    return 0


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``bandwise`` script and of ``python -m service``."""
    args_list = list(sys.argv[1:] if argv is None else argv)
    if not args_list or (args_list[0].startswith("-") and args_list[0] not in ("-h", "--help", "--version")):
        args_list.insert(0, "serve")
    args = _parser().parse_args(args_list)
    if args.command != "serve":
        _parser().print_help()
        return 2
    return serve({"host": args.host, "port": args.port, "workers": args.workers, "log_level": args.log_level})


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
