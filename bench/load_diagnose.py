"""Load benchmark of ``POST /v1/diagnose`` against the real gunicorn server.

Starts ``ptype serve`` (gunicorn, 2 sync workers by default) on a free loopback port, then
drives it with 16 concurrent clients posting a 60-level profile with the default member
count, and reports requests per second, p50 / p99 latency and errors.  The load generator
is Debian's ``wrk`` (C, event loop: it leaves the CPU to the server) when installed, else a
Python thread pool with keep-alive connections.  ``GET /healthz`` on the same server is the
in-run reference: the ratio diagnose/health says how much of the framework ceiling the
diagnosis leaves.

Then it times each stage of one request in this process (JSON decode, document
validation, profile checks, the engine with and without Monte-Carlo members, ``to_dict``,
JSON encode, the whole Flask request) to show where the time goes.

Results go to ``bench/results/load_diagnose.json``.  Every request goes to 127.0.0.1 only;
the run is bounded in time and stops by itself.

    .venv/bin/python bench/load_diagnose.py [--duration 15] [--connections 16] [--workers 2]
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import re
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
RESULTS = ROOT / "bench" / "results" / "load_diagnose.json"
TARGET = {"requests_per_s": 300.0, "p99_ms": 100.0, "errors": 0}


# -- the profile -------------------------------------------------------------------------
def profile_document(n_levels: int = 60) -> dict:
    """An invented 60-level freezing-rain sounding (warm nose over a cold surface layer)."""
    knots_p = [1000.0, 930.0, 850.0, 780.0, 700.0, 500.0, 300.0]
    knots_t = [-4.0, -1.0, 5.5, 0.0, -5.0, -21.0, -45.0]
    levels = []
    for i in range(n_levels):
        p = math.exp(math.log(1000.0) + (math.log(300.0) - math.log(1000.0)) * i / (n_levels - 1))
        for k in range(len(knots_p) - 1):
            if knots_p[k] >= p >= knots_p[k + 1]:
                f = ((math.log(knots_p[k]) - math.log(p))
                     / (math.log(knots_p[k]) - math.log(knots_p[k + 1])))
                t = knots_t[k] + f * (knots_t[k + 1] - knots_t[k])
                break
        depression = 0.5 if p > 450 else 12.0
        levels.append({"pressure_hpa": round(p, 1), "temperature_c": round(t, 2),
                       "dewpoint_c": round(t - depression, 2)})
    return {"site": {"id": "BENCH", "name": "Bench Hollow (invented)", "elevation_m": 100},
            "valid_time": "2026-01-20T06:00Z", "levels": levels}


# -- server ------------------------------------------------------------------------------
def free_port() -> int:
    """A TCP port free on the loopback interface now."""
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def start_server(workers: int, data_dir: str,
                 threads: int = 1) -> tuple[subprocess.Popen, str]:
    """Start ``ptype serve`` in its own process group; the process and its URL."""
    port = free_port()
    ptype_bin = Path(sys.executable).with_name("ptype")
    env = dict(os.environ, PTYPE_DATA_DIR=data_dir)
    proc = subprocess.Popen([str(ptype_bin), "serve", "--host", "127.0.0.1", "--port", str(port),
                             "--workers", str(workers), "--threads", str(threads)],
                            stdout=subprocess.PIPE,
                            stderr=subprocess.STDOUT, text=True, env=env, start_new_session=True)
    url = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 90
    import urllib.request
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError("server exited:\n" + (proc.stdout.read() if proc.stdout else ""))
        try:
            with urllib.request.urlopen(url + "/healthz", timeout=2) as r:
                if r.status == 200:
                    return proc, url
        except OSError:
            time.sleep(0.25)
    stop_server(proc)
    raise RuntimeError("server did not answer /healthz within 90 s")


def stop_server(proc: subprocess.Popen) -> None:
    """Stop the server's whole process group."""
    if proc.poll() is None:
        os.killpg(proc.pid, signal.SIGTERM)
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()


def server_cpu_seconds(master_pid: int) -> float:
    """CPU seconds (user + system) used so far by the gunicorn master and its workers.

    Read from /proc, so that the cost per request can be told apart from the share of the
    cores the server got on a machine that other work also uses."""
    tick = os.sysconf("SC_CLK_TCK")
    total = 0.0
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        pid, ppid = int(entry.name), int(fields[1])
        if pid == master_pid or ppid == master_pid:
            total += (int(fields[11]) + int(fields[12])) / tick
    return total


# -- load generators -----------------------------------------------------------------------
WRK_SCRIPT = """
wrk.method = "{method}"
wrk.headers["Content-Type"] = "application/json"
local f = io.open("{body}", "rb")
wrk.body = f:read("*a")
f:close()
"""


def _wrk_ms(text: str) -> float:
    value, unit = re.match(r"([\d.]+)(us|ms|s|m)", text).groups()
    return float(value) * {"us": 1e-3, "ms": 1.0, "s": 1e3, "m": 6e4}[unit]


def run_wrk(url: str, path: str, body: bytes | None, connections: int, duration: float) -> dict:
    """Load ``url + path`` with wrk; throughput and latency percentiles."""
    with tempfile.TemporaryDirectory() as tmp:
        script = Path(tmp) / "req.lua"
        if body is not None:
            (Path(tmp) / "body.json").write_bytes(body)
            script.write_text(WRK_SCRIPT.format(method="POST", body=Path(tmp) / "body.json"))
        else:
            script.write_text('wrk.method = "GET"\n')
        out = subprocess.run(["wrk", "-t", "2", "-c", str(connections), "-d", f"{int(duration)}s",
                              "--timeout", "10s", "--latency", "-s", str(script), url + path],
                             capture_output=True, text=True, timeout=duration + 60,
                             check=False).stdout
    pct = {m.group(1): _wrk_ms(m.group(2))
           for m in re.finditer(r"^\s+(50|75|90|99)%\s+(\S+)", out, re.MULTILINE)}
    total = int(re.search(r"(\d+) requests in", out).group(1))
    non2xx = re.search(r"Non-2xx or 3xx responses: (\d+)", out)
    sock = re.search(r"Socket errors: connect (\d+), read (\d+), write (\d+), timeout (\d+)", out)
    errors = (int(non2xx.group(1)) if non2xx else 0) + (sum(map(int, sock.groups())) if sock else 0)
    return {"tool": "wrk", "requests": total,
            "requests_per_s": float(re.search(r"Requests/sec:\s+([\d.]+)", out).group(1)),
            "p50_ms": pct.get("50"), "p90_ms": pct.get("90"), "p99_ms": pct.get("99"),
            "errors": errors, "raw": out.strip().splitlines()}


def run_threads(url: str, path: str, body: bytes | None, connections: int,
                duration: float) -> dict:
    """Load ``url + path`` from Python threads (when wrk is missing); same summary."""
    import http.client
    from urllib.parse import urlparse
    host = urlparse(url)
    latencies: list[float] = []
    errors = [0]
    lock = threading.Lock()
    stop_at = time.monotonic() + duration

    def client():
        conn = http.client.HTTPConnection(host.hostname, host.port, timeout=10)
        local, bad = [], 0
        while time.monotonic() < stop_at:
            start = time.perf_counter()
            try:
                if body is None:
                    conn.request("GET", path)
                else:
                    conn.request("POST", path, body=body,
                                 headers={"Content-Type": "application/json"})
                response = conn.getresponse()
                response.read()
                if response.status != 200:
                    bad += 1
                if response.getheader("Connection", "").lower() == "close":
                    conn.close()
            except OSError:
                bad += 1
                conn.close()
            local.append((time.perf_counter() - start) * 1000)
        with lock:
            latencies.extend(local)
            errors[0] += bad

    threads = [threading.Thread(target=client) for _ in range(connections)]
    begin = time.perf_counter()
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    elapsed = time.perf_counter() - begin
    latencies.sort()

    def q(f):
        return latencies[min(len(latencies) - 1, int(f * len(latencies)))] if latencies else None
    return {"tool": "python-threads", "requests": len(latencies),
            "requests_per_s": len(latencies) / elapsed, "p50_ms": q(0.50), "p90_ms": q(0.90),
            "p99_ms": q(0.99), "errors": errors[0]}


# -- where the time goes ---------------------------------------------------------------------
def stage_timings(document: dict, repeat: int = 40) -> dict:
    """Mean milliseconds of each stage of one request, measured in this process."""
    sys.path.insert(0, str(ROOT))
    from ptype.api import create_app

    import ptype
    from ptype.profile.document import parse_document

    body = json.dumps(document)

    def timed(fn, n=repeat):
        fn()
        start = time.perf_counter()
        for _ in range(n):
            fn()
        return (time.perf_counter() - start) / n * 1000

    profile = ptype.Profile.from_document(document)
    diagnosis = ptype.diagnose(profile)
    payload = diagnosis.to_dict()
    client = create_app({"TESTING": False}).test_client()
    stages = {
        "json_decode": timed(lambda: json.loads(body), 200),
        "document_validation_pydantic": timed(lambda: parse_document(json.loads(body)), 200),
        "profile_checks": timed(lambda: ptype.Profile.from_document(document), 100),
        "engine_members_0": timed(lambda: ptype.diagnose(profile, members=0)),
        "engine_members_50": timed(lambda: ptype.diagnose(profile)),
        "to_dict": timed(lambda: diagnosis.to_dict(), 100),
        "json_encode": timed(lambda: json.dumps(payload, separators=(",", ":")), 200),
        "flask_request_total": timed(lambda: client.post("/v1/diagnose", data=body,
                                                         content_type="application/json")),
        "flask_healthz": timed(lambda: client.get("/healthz"), 200),
    }
    engine_profile = _engine_hotspots(profile)
    return {"ms": {k: round(v, 3) for k, v in stages.items()},
            "engine_breakdown_ms": _engine_breakdown(profile),
            "engine_hotspots": engine_profile}


def _engine_breakdown(profile, repeat: int = 20) -> dict:
    """The engine's parts for one profile with 50 members, through its public entry points:
    perturbing the members, the deterministic methods on the profile, all methods on the
    50 perturbed columns, and each method alone on those 50 columns."""
    from ptype.engine.columns import Columns
    from ptype.engine.methods import METHOD_NAMES
    from ptype.engine.probability import perturb
    from ptype.engine.run import diagnose_columns

    def timed(fn):
        fn()
        start = time.perf_counter()
        for _ in range(repeat):
            fn()
        return round((time.perf_counter() - start) / repeat * 1000, 3)

    columns = Columns.from_profiles([profile])
    members = perturb(columns, 50, 0)
    out = {"columns_from_profile": timed(lambda: Columns.from_profiles([profile])),
           "perturb_50_members": timed(lambda: perturb(columns, 50, 0)),
           "methods_on_profile": timed(lambda: diagnose_columns(columns)),
           "methods_on_50_members": timed(lambda: diagnose_columns(members))}
    for name in METHOD_NAMES:
        out[f"only_{name}_on_50_members"] = timed(lambda n=name: diagnose_columns(members, [n]))
    return out


def _engine_hotspots(profile, top: int = 15) -> list[dict]:
    import cProfile
    import pstats

    import ptype
    prof = cProfile.Profile()
    prof.enable()
    for _ in range(10):
        ptype.diagnose(profile)
    prof.disable()
    stats = pstats.Stats(prof)
    rows = []
    for (filename, line, name), (_, _, tottime, cumtime, _) in stats.stats.items():
        if "/ptype/" in filename and not name.startswith("<"):
            rows.append({"function": f"{Path(filename).name}:{line}({name})",
                         "cumulative_ms_per_call": round(cumtime / 10 * 1000, 2),
                         "own_ms_per_call": round(tottime / 10 * 1000, 2)})
    rows.sort(key=lambda r: -r["cumulative_ms_per_call"])
    return rows[:top]


# -- main ------------------------------------------------------------------------------------
def main(argv: list[str] | None = None) -> int:
    """Run the load test and write its results; exit status."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--duration", type=float, default=15.0, help="seconds per load run")
    parser.add_argument("--connections", type=int, default=16, help="concurrent clients")
    parser.add_argument("--workers", type=int, default=2, help="gunicorn workers")
    parser.add_argument("--threads", type=int, default=1,
                        help="threads per worker (gunicorn gthread worker)")
    parser.add_argument("--levels", type=int, default=60, help="levels in the profile")
    parser.add_argument("--tool", choices=("auto", "wrk", "python"), default="auto")
    parser.add_argument("--out", default=str(RESULTS))
    args = parser.parse_args(argv)
    args.duration = min(max(args.duration, 2.0), 120.0)  # bounded run

    use_wrk = args.tool == "wrk" or (args.tool == "auto" and shutil.which("wrk"))
    load = run_wrk if use_wrk else run_threads
    document = profile_document(args.levels)
    body = json.dumps(document).encode()

    with tempfile.TemporaryDirectory() as data_dir:
        proc, url = start_server(args.workers, data_dir, args.threads)
        try:
            # Warm each worker (imports, caches) before measuring.
            run_threads(url, "/v1/diagnose", body, args.workers * 2, 2.0)
            health = load(url, "/healthz", None, args.connections, min(args.duration, 5.0))
            cpu_before = server_cpu_seconds(proc.pid)
            diagnose = load(url, "/v1/diagnose", body, args.connections, args.duration)
            cpu_used = server_cpu_seconds(proc.pid) - cpu_before
        finally:
            stop_server(proc)

    cpu_ms = 1000.0 * cpu_used / max(diagnose["requests"], 1)
    diagnose["server_cpu_ms_per_request"] = round(cpu_ms, 2)
    # What the same server would sustain with the cores to itself (CPU-bound, one request
    # per worker at a time).
    diagnose["capacity_req_s_if_cores_free"] = round(
        min(args.workers, os.cpu_count() or 1) * 1000.0 / cpu_ms, 1)
    stages = stage_timings(document)
    meets = (diagnose["requests_per_s"] >= TARGET["requests_per_s"]
             and (diagnose["p99_ms"] or 1e9) <= TARGET["p99_ms"]
             and diagnose["errors"] == TARGET["errors"])
    result = {
        "benchmark": "POST /v1/diagnose under load",
        "date_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
        "machine": {"cpus": os.cpu_count(), "python": platform.python_version(),
                    "load_average_1m_at_end": round(os.getloadavg()[0], 2)},
        "server": {"wsgi": "gunicorn", "worker_class": "gthread (ptype BoundedThreadWorker)",
                   "workers": args.workers, "threads": args.threads},
        "load": {"connections": args.connections, "duration_s": args.duration,
                 "profile_levels": args.levels, "members": "default (50)"},
        "diagnose": {k: v for k, v in diagnose.items() if k != "raw"},
        "healthz_reference": {k: v for k, v in health.items() if k != "raw"},
        "ratio_diagnose_to_healthz_rps": round(diagnose["requests_per_s"]
                                               / max(health["requests_per_s"], 1e-9), 4),
        "target": TARGET,
        "meets_target": meets,
        "stages_in_process": stages,
    }
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(result, indent=2) + "\n")
    d = result["diagnose"]
    print(f"POST /v1/diagnose ({args.levels} levels, 50 members), {args.connections} clients, "
          f"{args.workers} gunicorn workers, {d['tool']}:")
    print(f"  {d['requests_per_s']:.1f} req/s   p50 {d['p50_ms']:.1f} ms   "
          f"p99 {d['p99_ms']:.1f} ms   errors {d['errors']}   ({d['requests']} requests)")
    print(f"  server CPU {d['server_cpu_ms_per_request']:.1f} ms per request -> "
          f"{d['capacity_req_s_if_cores_free']:.0f} req/s with the cores to itself")
    print(f"  GET /healthz reference: {health['requests_per_s']:.0f} req/s; "
          f"diagnose/healthz = {result['ratio_diagnose_to_healthz_rps']:.3f}")
    print(f"  target >= {TARGET['requests_per_s']:.0f} req/s, p99 <= {TARGET['p99_ms']:.0f} ms, "
          f"0 errors: {'met' if meets else 'NOT met'}")
    print("  in-process stage means (ms): " + ", ".join(
        f"{k} {v:.2f}" for k, v in stages["ms"].items()))
    print("  engine breakdown (ms): " + ", ".join(
        f"{k} {v:.2f}" for k, v in stages["engine_breakdown_ms"].items()))
    print(f"  results: {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
