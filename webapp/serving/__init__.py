"""Serving the station: waitress for HTTP, cheroot for HTTPS, sized so no one client stalls it.

The limits and their reasons are in `limits`; waitress's and cheroot's changes in
`waitress_server` and `cheroot_server`.
"""

from __future__ import annotations

import sys
import threading
from dataclasses import replace
from typing import Any

import click
from flask import Flask

from .limits import (
    MAX_REQUEST_BODY_BYTES,
    MAX_REQUEST_HEADER_BYTES,
    Limits,
    raise_open_files_limit,
)


def serve(app: Flask, host: str, port: int, https: bool = False,
          extra_names: tuple[str, ...] = ()) -> None:
    """Serve `app` until Ctrl+C: waitress, or cheroot with TLS for `https`."""
    if https:
        serve_https(app, host, port, extra_names)
    else:
        serve_http(app, host, port)


def warm_up() -> None:
    """Load what the first signature would otherwise wait for (WeasyPrint and its fonts, about
    a second; the stamp font, about a second), while the station starts serving."""
    from ..records import pdf, stamp_style

    pdf.font_configuration()
    stamp_style.stamp_font()


def _start_warm_up() -> None:
    threading.Thread(target=warm_up, name="sparkward-warm-up", daemon=True).start()


# --- HTTP: waitress ---------------------------------------------------------------------

def waitress_options(limits: Limits) -> dict[str, Any]:
    """Waitress's adjustments for the station (waitress.adjustments.Adjustments)."""
    return {
        "threads": limits.threads,
        "connection_limit": limits.connection_limit,
        "channel_timeout": limits.idle_timeout_s,
        "cleanup_interval": limits.cleanup_interval_s,
        "max_request_header_size": MAX_REQUEST_HEADER_BYTES,
        "max_request_body_size": MAX_REQUEST_BODY_BYTES,
        # select() cannot watch a descriptor numbered 1,024 or more (FD_SETSIZE, from
        # memory: select(2)); with 1,500 connections it must be poll().
        "asyncore_use_poll": True,
        "ident": "Sparkward",
    }


def station_waitress(app: Any, host: str, port: int, limits: Limits,
                     listeners: list[Any] | None = None, addresses: Any = None) -> Any:
    """A waitress server for `app` with the per-address cap and the header deadline; call
    `.run()` to serve, `.close()` to stop. Port 0 picks a free port (`.effective_port`).
    With `listeners` it serves those already-bound sockets (a worker process's share) and
    counts addresses in `addresses` (shared by the workers)."""
    from waitress.adjustments import Adjustments
    from waitress.server import MultiSocketServer
    from waitress.task import ThreadedTaskDispatcher

    from .waitress_server import StationServer

    adj = Adjustments(host=host or "127.0.0.1", port=port, **waitress_options(limits))
    dispatcher = ThreadedTaskDispatcher()
    dispatcher.set_thread_count(adj.threads)
    socket_map: dict[int, Any] = {}
    if listeners is None:
        servers = [StationServer(app, socket_map, dispatcher=dispatcher, adj=adj,
                                 sockinfo=sockinfo, limits=limits, addresses=addresses)
                   for sockinfo in adj.listen]  # "localhost" may listen on IPv4 and IPv6
    else:
        servers = [StationServer(app, socket_map, _sock=listener, bind_socket=False,
                                 sockinfo=(listener.family, listener.type, listener.proto,
                                           listener.getsockname()),
                                 dispatcher=dispatcher, adj=adj, limits=limits,
                                 addresses=addresses)
                   for listener in listeners]
    if len(servers) == 1:
        return servers[0]
    multi = MultiSocketServer(socket_map, adj,
                              [(s.effective_host, s.effective_port) for s in servers],
                              dispatcher, servers[-1].log_info)
    multi.effective_port = servers[0].effective_port
    return multi


def serve_http(app: Flask, host: str, port: int) -> None:
    """Waitress in `limits.workers` processes (one: this process) on one listening socket."""
    from ..station.authority import station_authority
    from .workers import bind_listeners, serve_in_workers

    limits = raise_open_files_limit(Limits.from_config(app.config))
    if limits.workers > 1:
        # Made (or loaded) once here, so two workers never both create the station's CA.
        station_authority(app.config["DB_PATH"], app.config["STATION_NAME"], _now())
    try:
        listeners = bind_listeners(host, port)
    except OSError as err:
        raise click.ClickException(f"cannot listen on {host}:{port}: {err}") from None
    shown = "127.0.0.1" if host in ("0.0.0.0", "::") else host
    click.echo(f"Sparkward station serving {app.config['DB_PATH']}")
    click.echo(_limits_line(limits))
    click.echo(f"Open http://{shown}:{port}/ (press Ctrl+C to stop)")
    sys.stdout.flush()
    if limits.workers == 1:
        server = station_waitress(app, host, port, limits, listeners=listeners)
        _start_warm_up()
        server.run()
    else:
        serve_in_workers(app, listeners, limits, on_worker_start=_start_warm_up)


def _limits_line(limits: Limits) -> str:
    return (f"Limits: {limits.workers} worker process{'es' if limits.workers > 1 else ''} "
            f"of {limits.threads} threads, {limits.connection_limit} connections "
            f"({limits.per_address_limit} per address), idle connections closed after "
            f"{limits.idle_timeout_s:g} s, request headers within {limits.header_timeout_s:g} s")


# --- HTTPS: cheroot ---------------------------------------------------------------------

def serve_https(app: Flask, host: str, port: int, extra_names: tuple[str, ...]) -> None:
    """cheroot with TLS 1.2 or newer and the station's own server certificate (waitress has
    no TLS); the certificate is issued or renewed here, before the first request."""
    from ..records.server_identity import ServerNameProblem
    from ..station.authority import lan_names, station_tls
    from .cheroot_server import station_cheroot

    try:
        tls = station_tls(app.config["DB_PATH"], app.config["STATION_NAME"],
                          lan_names(host, extra_names), _now())
    except ServerNameProblem as problem:
        raise click.ClickException(str(problem)) from None
    app.config["SESSION_COOKIE_SECURE"] = True  # the log-in cookie never goes out in clear
    # The __Host- prefix makes the browser refuse the cookie unless it is Secure, for this
    # host only (no Domain) and for the whole path: a neighbour on the LAN cannot plant one
    # (OWASP ASVS 4.0.3 V3.4.4).
    app.config["SESSION_COOKIE_NAME"] = "__Host-session"
    app.config["SESSION_COOKIE_DOMAIN"] = None
    app.config["SESSION_COOKIE_PATH"] = "/"
    limits = raise_open_files_limit(Limits.from_config(app.config))
    server = station_cheroot(app, host, port, tls, limits)
    try:
        server.prepare()  # binds the port: a port in use is said here, not as a traceback
    except OSError as err:
        raise click.ClickException(f"cannot listen on {host}:{port}: {err}") from None
    _start_warm_up()
    click.echo(f"Sparkward station serving {app.config['DB_PATH']} over HTTPS")
    click.echo(_limits_line(replace(limits, workers=1, threads=server.numthreads,
                                    idle_timeout_s=server.timeout,
                                    header_timeout_s=server.timeout)))
    _announce_https(tls, host, port)
    sys.stdout.flush()
    try:
        server.serve()
    except KeyboardInterrupt:
        pass
    finally:
        server.stop()


def _url(name: str, port: int) -> str:
    return f"https://[{name}]:{port}/" if ":" in name else f"https://{name}:{port}/"


def _announce_https(tls: Any, host: str, port: int) -> None:
    """Where tablets find the station, and how they learn to trust it."""
    from cryptography import x509

    from ..records.server_identity import certificate_fingerprint

    alternative = tls.certificate.extensions.get_extension_for_class(
        x509.SubjectAlternativeName).value
    addresses = alternative.get_values_for_type(x509.IPAddress)
    names = alternative.get_values_for_type(x509.DNSName) + [str(a) for a in addresses]
    # On the LAN, the machine's own addresses first: a tablet reaches those without DNS.
    shown = ([str(a) for a in addresses
              if not a.is_loopback and (host == "::" or a.version == 4)]
             + [n for n in names if n != "localhost" and n not in map(str, addresses)]
             if host in ("0.0.0.0", "::") else [host]) or ["127.0.0.1"]
    state = "issued now" if tls.issued else "kept"
    click.echo(f"Server certificate ({state}, valid until "
               f"{tls.certificate.not_valid_after_utc:%Y-%m-%d}) for: {', '.join(names)}")
    click.echo("Open " + " or ".join(_url(n, port) for n in shown) + " (press Ctrl+C to stop)")
    if host in ("127.0.0.1", "localhost", "::1"):
        click.echo("Listening on this machine only: add --host 0.0.0.0 for tablets on the LAN.")
    click.echo("Tablets must trust the station's certificate authority first: on each, open "
               f"{_url(shown[0], port)}station-ca, or copy the file {tls.authority_file}")
    click.echo(f"  its SHA-256 fingerprint (compare it on the tablet): "
               f"{certificate_fingerprint(tls.authority_cert)}")


def _now() -> Any:
    from ..clock import system_clock

    return system_clock()
