"""``ptype serve``: run the HTTP service under gunicorn (a production WSGI server).

The application is ``ptype.api:create_app()``; state lives in ``PTYPE_DATA_DIR``
(default ``./.data``).  ``--demo`` sets ``PTYPE_DEMO=1`` so the application
loads the demo sites and storm into an empty store on start.

Workers are threaded (:class:`ptype.cli.serve_worker.BoundedThreadWorker`): idle connections
cost no thread and a slow client holds one for at most the read time limits, so ``/healthz``
and small requests keep answering while many clients are connected; the computing requests
are bounded by :mod:`ptype.api.budget`.  The compiled kernels stay serial in the server
(:func:`ptype.thermo.fast.set_parallel`): no compiled thread pool exists in the master when
it forks its workers, and the workers run requests side by side instead.
"""

from __future__ import annotations

import argparse
import os
import sys

DEFAULT_HOST = "127.0.0.1"
DEFAULT_PORT = 8080
DEFAULT_WORKERS = 2
#: Threads per worker: enough for dozens of slow clients at once (each holds a thread for
#: at most the read time limits) while the computing requests queue for their work slots.
DEFAULT_THREADS = 32


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``serve`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser("serve", help="run the HTTP service (JSON API, forecaster page, diagrams)",
                       description="Run the ptype HTTP service under gunicorn. The forecaster page "
                                   "is at /, the API reference at /docs.")
    p.add_argument("--host", default=DEFAULT_HOST,
                   help=f"address to listen on (default {DEFAULT_HOST})")
    p.add_argument("--port", type=_port, default=DEFAULT_PORT,
                   help=f"TCP port (default {DEFAULT_PORT}; 0 picks a free one)")
    p.add_argument("--workers", type=_positive, default=DEFAULT_WORKERS,
                   help=f"worker processes (default {DEFAULT_WORKERS})")
    p.add_argument("--threads", type=_positive, default=DEFAULT_THREADS,
                   help=f"threads per worker (default {DEFAULT_THREADS}; they serve slow and "
                        "many clients, the computing requests share PTYPE_WORK_SLOTS per "
                        "worker)")
    p.add_argument("--timeout", type=_positive, default=60,
                   help="seconds before a worker whose main loop is stuck is restarted "
                        "(default 60; requests themselves stop at PTYPE_REQUEST_DEADLINE_S)")
    p.add_argument("--demo", action="store_true",
                   help="load the demo sites and storm into an empty store on start")
    p.add_argument("--access-log", action="store_true", help="log every request on stderr")
    p.set_defaults(func=run)


def _port(text: str) -> int:
    import argparse
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"port {text!r} is not a number") from None
    if not 0 <= value <= 65535:
        raise argparse.ArgumentTypeError(f"port {value} is outside 0-65535")
    return value


def _positive(text: str) -> int:
    import argparse
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"{value} must be at least 1")
    return value


def _url(host: str, port: int) -> str:
    shown = f"[{host}]" if ":" in host else host
    if host in ("0.0.0.0", "::"):
        shown = "127.0.0.1"
    return f"http://{shown}:{port}/"


def gunicorn_options(args: argparse.Namespace) -> dict:
    """Settings handed to gunicorn (also used by the load benchmark)."""
    bind = f"[{args.host}]:{args.port}" if ":" in args.host else f"{args.host}:{args.port}"
    options = {
        "bind": bind,
        "workers": args.workers,
        "threads": args.threads,
        "worker_class": "ptype.cli.serve_worker.BoundedThreadWorker",
        "timeout": args.timeout,
        "graceful_timeout": 10,
        "keepalive": 5,
        # Load the application once in the master so workers fork with it imported
        # (numpy, matplotlib, the engine): faster start, less memory.
        "preload_app": True,
        "accesslog": "-" if args.access_log else None,
        "errorlog": "-",
        "loglevel": "warning",
        "proc_name": "ptype",
    }
    return options


#: A small invented sounding (warm nose over a cold surface layer) used to warm the engine.
_WARM_UP_DOCUMENT = {"levels": [
    {"pressure_hpa": p, "temperature_c": t, "dewpoint_c": t - 0.5}
    for p, t in ((1000, -3.0), (950, -1.0), (900, 2.5), (850, 4.0), (800, 1.0), (700, -6.0),
                 (600, -13.0), (500, -22.0), (400, -33.0))]}


def warm_up() -> None:
    """Run one small diagnosis in the master before the workers fork, so the first requests
    do not pay for lazy imports and first-call set-up.  (The diagram is not warmed: its
    first drawing costs seconds of plotting imports, too much to add to every start.)

    Small on purpose: it stays on the numpy path (no compiled thread pool is started
    before ``fork``).  A failure here is logged and ignored: the workers still start.
    """
    try:
        import ptype
        ptype.diagnose(_WARM_UP_DOCUMENT, members=10, seed=0)
    except Exception as exc:  # noqa: BLE001 - never block the server start
        print(f"ptype serve: warm-up skipped ({type(exc).__name__}: {exc})", file=sys.stderr)


def check_bind(host: str, port: int) -> None:
    """Refuse, before anything starts, an address this machine cannot listen on.

    Names are resolved and the port bound once (then released) exactly as gunicorn will,
    so "address in use" or "no such address" is one line at once instead of a server that
    dies after loading the application.
    """
    import errno
    import socket

    from ptype.errors import OptionError
    try:
        infos = socket.getaddrinfo(host, port, type=socket.SOCK_STREAM,
                                   flags=socket.AI_PASSIVE)
    except (socket.gaierror, UnicodeError) as exc:
        raise OptionError(f"--host {host}: not an address of this machine "
                          f"({getattr(exc, 'strerror', None) or exc})", field="host") from None
    family, kind, proto, _, address = infos[0]
    with socket.socket(family, kind, proto) as sock:
        # gunicorn sets SO_REUSEADDR too: a port held only by closing connections is free.
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            sock.bind(address)
        except OSError as exc:
            if exc.errno == errno.EADDRINUSE:
                raise OptionError(f"--port {port}: {_url(host, port)} is already in use by "
                                  "another program; choose another --port (0 picks a free one)",
                                  field="port") from None
            if exc.errno in (errno.EACCES, errno.EPERM):
                raise OptionError(f"--port {port}: not allowed to listen on it (ports below "
                                  "1024 need privileges); choose another --port",
                                  field="port") from None
            raise OptionError(f"--host {host}: cannot listen there ({exc.strerror})",
                              field="host") from None


def check_data_dir(data_dir: str) -> None:
    """Create the data folder if needed and make sure the service can write its store there."""
    import tempfile

    from ptype.errors import OptionError
    if os.environ.get("PTYPE_DATABASE_URL"):
        return  # the store is elsewhere
    try:
        os.makedirs(data_dir, mode=0o700, exist_ok=True)  # private, as the store makes it
        with tempfile.TemporaryFile(dir=data_dir):
            pass
    except OSError as exc:
        raise OptionError(f"data folder {data_dir} (PTYPE_DATA_DIR): cannot write there "
                          f"({exc.strerror or exc})", field="PTYPE_DATA_DIR") from None
    db = os.path.join(data_dir, "ptype.sqlite3")
    if os.path.exists(db) and not (os.path.isfile(db) and os.access(db, os.R_OK | os.W_OK)):
        raise OptionError(f"store {db}: not a file the service can read and write",
                          field="PTYPE_DATA_DIR")


def _serial_kernels() -> None:
    """Keep the compiled kernels serial in this process (master before ``fork``, and each
    worker after it): no compiled thread pool is started, so none is forked."""
    from ptype.thermo import fast
    fast.set_parallel(False)


#: glibc ``mallopt`` parameters (malloc.h): a fixed mmap threshold and the number of arenas.
_M_MMAP_THRESHOLD, _M_ARENA_MAX = -3, -8


def _bounded_malloc() -> None:
    """Keep a threaded worker's memory from creeping (glibc only; elsewhere nothing).

    By default glibc raises its mmap threshold after large blocks are freed, so later large
    numpy arrays come from the heap arenas (one per thread, up to 8 per core) and their
    memory is kept after use; a fixed 1 MiB threshold returns every large array to the
    system when it is freed, and 4 arenas bound the rest (mallopt(3)).
    """
    import ctypes
    import ctypes.util
    name = ctypes.util.find_library("c")
    if not name or "musl" in name:
        return
    try:
        libc = ctypes.CDLL(name)
        libc.mallopt(_M_MMAP_THRESHOLD, 1 << 20)
        libc.mallopt(_M_ARENA_MAX, 4)
    except (OSError, AttributeError):
        return


def _post_fork(_server, _worker) -> None:
    """gunicorn's hook in each new worker."""
    _serial_kernels()
    _bounded_malloc()


def run(args: argparse.Namespace) -> int:
    """Start the HTTP service under gunicorn; exit status."""
    data_dir = os.path.abspath(os.environ.get("PTYPE_DATA_DIR")
                               or os.path.join(os.getcwd(), ".data"))
    check_bind(args.host, args.port)
    check_data_dir(data_dir)
    if args.demo:
        os.environ["PTYPE_DEMO"] = "1"
    os.environ["PTYPE_DATA_DIR"] = data_dir

    from gunicorn.app.base import BaseApplication

    options = gunicorn_options(args)

    class _Service(BaseApplication):
        def load_config(self):
            for key, value in options.items():
                if value is not None:
                    self.cfg.set(key, value)
            self.cfg.set("when_ready", _announce)
            self.cfg.set("post_fork", _post_fork)

        def load(self):
            from ptype.api import create_app
            _serial_kernels()  # before the demo load computes anything in the master
            app = create_app({"PTYPE_DEMO": bool(args.demo)})
            warm_up()
            return app

    def _announce(server):
        # Print the real address (port 0 resolves to the one the kernel chose).
        for listener in server.LISTENERS:
            host, port = listener.sock.getsockname()[:2]
            shown = args.host if args.host not in ("0.0.0.0", "::") else host
            print(f"ptype serving on {_url(shown, port)} "
                  f"({args.workers} worker{'s' if args.workers != 1 else ''}; data in {data_dir}"
                  f"{'; demo data' if args.demo else ''}) - Ctrl-C to stop", flush=True)

    _Service().run()
    return 0


if __name__ == "__main__":  # pragma: no cover
    from ptype.cli import main
    sys.exit(main(["serve", *sys.argv[1:]]))
