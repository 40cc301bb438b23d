"""The real server: ``ptype serve`` started as a process on a free port, spoken to over HTTP."""

from __future__ import annotations

import os
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
import requests
from api_support import free_port, freezing_rain_document

PTYPE = Path(sys.executable).with_name("ptype")


def start_server(tmp_path, *extra: str, port: int | None = None):
    """Start ``ptype serve`` and wait until it prints its URL; returns (process, base URL)."""
    port = port or free_port()
    env = dict(os.environ, PTYPE_DATA_DIR=str(tmp_path / "data"))
    log = open(tmp_path / "server.log", "w+")  # noqa: SIM115 - closed by stop_server
    proc = subprocess.Popen([str(PTYPE), "serve", "--host", "127.0.0.1", "--port", str(port),
                             *extra], stdout=log, stderr=subprocess.STDOUT, env=env,
                            start_new_session=True)
    deadline = time.monotonic() + 60
    url = None
    while time.monotonic() < deadline:
        log.seek(0)
        match = re.search(r"http://127\.0\.0\.1:\d+/", log.read())
        if match:
            url = match.group(0).rstrip("/")
            try:
                if requests.get(url + "/healthz", timeout=2).ok:
                    break
            except requests.ConnectionError:
                pass
        if proc.poll() is not None:
            break
        time.sleep(0.2)
    else:
        stop_server(proc)
    if url is None or proc.poll() is not None:
        log.seek(0)
        output = log.read()
        stop_server(proc)
        raise AssertionError(f"ptype serve did not come up:\n{output}")
    proc.log = log
    return proc, url


def stop_server(proc) -> None:
    if proc.poll() is None:
        os.killpg(proc.pid, signal.SIGTERM)  # the server's own session (gunicorn + workers)
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait(timeout=10)
    log = getattr(proc, "log", None)
    if log is not None:
        log.close()


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    proc, url = start_server(tmp_path_factory.mktemp("serve"), "--workers", "2")
    yield proc, url
    stop_server(proc)


def test_serve_prints_url_and_answers(server):
    proc, url = server
    proc.log.seek(0)
    assert f"ptype serving on {url}/" in proc.log.read()
    health = requests.get(url + "/healthz", timeout=10)
    assert health.status_code == 200 and health.json()["status"] == "ok"
    page = requests.get(url + "/", timeout=10)
    assert page.status_code == 200 and "What will reach the ground?" in page.text


def test_serve_diagnoses_over_http(server):
    _, url = server
    # FZRA: Bourgouin (2000) refreezing area below 46 + 0.66 x melting area, surface < 0 degC.
    response = requests.post(url + "/v1/diagnose?seed=1", json=freezing_rain_document(),
                             timeout=30)
    assert response.status_code == 200
    assert response.headers["Content-Type"].startswith("application/json")
    assert response.json()["ptype"] == "FZRA"


def test_serve_rejects_large_body_and_stays_up(server):
    _, url = server
    big = b'{"levels": [' + b"0," * (5 * 1024 * 1024) + b"0]}"
    try:
        response = requests.post(url + "/v1/diagnose", data=big,
                                 headers={"Content-Type": "application/json"}, timeout=30)
        assert response.status_code == 413
        assert response.json()["error"]["code"] == "request_entity_too_large"
    except requests.ConnectionError:
        pass  # the server may close the connection before reading it all; that is allowed
    bad = requests.post(url + "/v1/diagnose", data="<x/>",
                        headers={"Content-Type": "application/xml"}, timeout=10)
    assert bad.status_code == 415
    assert requests.get(url + "/healthz", timeout=10).status_code == 200


def test_serve_demo_flag_sets_environment(server, tmp_path):
    # --demo reaches the application as PTYPE_DEMO=1, which loads the demo sites into the
    # empty store; without it the store stays empty.
    _, plain_url = server
    assert requests.get(plain_url + "/v1/sites", timeout=10).json()["sites"] == []
    proc, url = start_server(tmp_path, "--demo", "--workers", "1")
    try:
        assert requests.get(url + "/healthz", timeout=10).ok
        proc.log.seek(0)
        assert "demo data" in proc.log.read()
        assert len(requests.get(url + "/v1/sites", timeout=10).json()["sites"]) > 0
    finally:
        stop_server(proc)


def test_serve_bad_port_is_one_line_error():
    result = subprocess.run([str(PTYPE), "serve", "--port", "99999"], capture_output=True,
                            text=True, timeout=60, check=False)
    assert result.returncode == 2
    assert "outside 0-65535" in result.stderr and "Traceback" not in result.stderr
