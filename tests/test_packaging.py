"""The distributions as a user gets them: ``python -m build``, ``twine check``, and the wheel
installed in a fresh virtual environment, first without extras, then with ``[service]``.

Outside references: PyPA ``build`` (with build isolation, so the declared build requirement
is what builds), ``twine check --strict`` (what the package index would render), ``pip`` and
``venv`` of the interpreter running the tests, and the real gunicorn server of the installed
``ptype serve``.  One sdist and wheel are built per run and shared by every test here; the
virtual environment is installed once and probed once (marker ``package``; about 2 minutes).
"""

from __future__ import annotations

import json
import os
import re
import shutil
import signal
import subprocess
import sys
import tarfile
import time
import tomllib
import zipfile
from pathlib import Path

import pytest
import requests
from api_support import free_port

import ptype
from ptype.cli import EXTRA_MODULES

pytestmark = [pytest.mark.package, pytest.mark.timeout(900)]

ROOT = Path(__file__).resolve().parents[1]
PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text())
VERSION = PYPROJECT["project"]["version"]
DEMO_SOUNDING = ROOT / "soundings_demo" / "json" / "mistleby-bridge_20260127T1600.json"
#: Distributions that must never come with a plain ``pip install ptype``.
NOT_IN_CORE = ("flask", "gunicorn", "sqlalchemy", "distributed", "psycopg", "matplotlib",
               "metpy", "jinja2")


def _source_files() -> list[str]:
    """The files of the source tree that a clean clone has (tracked or new, never ignored)."""
    try:
        out = subprocess.run(
            ["git", "ls-files", "-z", "--cached", "--others", "--exclude-standard"],
            cwd=ROOT, capture_output=True, check=True, timeout=60).stdout
    except (OSError, subprocess.CalledProcessError):
        pytest.skip("the source tree is not a git checkout; cannot tell its files")
    return [name for name in out.decode().split("\0")
            if name and (ROOT / name).is_file() and not (ROOT / name).is_symlink()]


def _run(args, **kwargs) -> subprocess.CompletedProcess:
    kwargs.setdefault("timeout", 600)
    return subprocess.run([str(a) for a in args], capture_output=True, text=True, check=False,
                          **kwargs)


def _clean_env(**extra: str) -> dict[str, str]:
    """The environment without anything that points Python at the source tree."""
    env = {k: v for k, v in os.environ.items()
           if k not in ("PYTHONPATH", "PYTHONHOME", "VIRTUAL_ENV", "PTYPE_DEBUG")}
    return {**env, "PIP_DISABLE_PIP_VERSION_CHECK": "1", **extra}


@pytest.fixture(scope="module")
def dist(tmp_path_factory) -> dict:
    """The sdist and wheel built from a copy of the source tree, and the build's output."""
    tmp = tmp_path_factory.mktemp("dist")
    src = tmp / "src"
    for name in _source_files():
        (src / name).parent.mkdir(parents=True, exist_ok=True)
        shutil.copy2(ROOT / name, src / name)
    out = tmp / "out"
    built = _run([sys.executable, "-m", "build", "--outdir", out, src], cwd=tmp,
                 env=_clean_env())
    assert built.returncode == 0, built.stdout[-3000:] + built.stderr[-3000:]
    wheels, sdists = list(out.glob("*.whl")), list(out.glob("*.tar.gz"))
    assert len(wheels) == 1 and len(sdists) == 1, list(out.iterdir())
    return {"wheel": wheels[0], "sdist": sdists[0], "log": built.stdout + built.stderr,
            "sources": _source_files()}


def test_build_names_version_and_warns_nothing_of_ours(dist):
    assert dist["wheel"].name == f"ptype-{VERSION}-py3-none-any.whl"
    assert dist["sdist"].name == f"ptype-{VERSION}.tar.gz"
    # setuptools reports deprecated configuration (licence tables and classifiers, package
    # data that is not a package...) as warnings in the build output.
    warnings = [line for line in dist["log"].splitlines()
                if re.search(r"Deprecat|is absent from the .packages. configuration|"
                             r"License classifiers", line)]
    assert not warnings, "\n".join(warnings)


def test_twine_check_passes(dist):
    checked = _run([sys.executable, "-m", "twine", "check", "--strict", dist["sdist"],
                    dist["wheel"]])
    assert checked.returncode == 0, checked.stdout + checked.stderr
    assert checked.stdout.count("PASSED") == 2


def test_wheel_holds_only_ptype_and_its_data(dist):
    with zipfile.ZipFile(dist["wheel"]) as whl:
        names = whl.namelist()
        metadata = whl.read(f"ptype-{VERSION}.dist-info/METADATA").decode()
        top_level = whl.read(f"ptype-{VERSION}.dist-info/top_level.txt").decode().split()
    strays = [n for n in names
              if not n.startswith(("ptype/", f"ptype-{VERSION}.dist-info/"))]
    assert not strays, f"files outside ptype/: {strays}"
    assert top_level == ["ptype"]
    assert not any(n.startswith(("api/", "tests/", "soundings_demo/", "docs/")) for n in names)
    assert "ptype/py.typed" in names and "ptype/api/__init__.py" in names
    assert any(re.fullmatch(r"ptype/api/templates/[^/]+\.html", n) for n in names)
    assert any(re.fullmatch(r"ptype/api/static/[^/]+", n) for n in names)
    # Every file of the packages in the source tree is in the wheel (api/ as ptype/api/):
    # templates, static files and any other data the library reads at run time.
    wanted = {("ptype/" + s if s.startswith("api/") else s) for s in dist["sources"]
              if s.startswith(("ptype/", "api/"))}
    missing = sorted(wanted - set(names))
    assert not missing, f"source files missing from the wheel: {missing}"
    assert "License-Expression: Apache-2.0" in metadata
    assert f"ptype-{VERSION}.dist-info/licenses/LICENSE" in names
    assert "Classifier: License ::" not in metadata


def test_wheel_core_requirements_are_lean(dist):
    with zipfile.ZipFile(dist["wheel"]) as whl:
        metadata = whl.read(f"ptype-{VERSION}.dist-info/METADATA").decode()
    requires = re.findall(r"^Requires-Dist: (.+)$", metadata, flags=re.MULTILINE)
    core = [r.lower() for r in requires if "extra ==" not in r]
    assert not [r for r in core if r.startswith(NOT_IN_CORE)], core
    assert any(r.startswith("numpy") for r in core) and any(r.startswith("requests") for r in core)
    extras = set(re.findall(r"^Provides-Extra: (\S+)$", metadata, flags=re.MULTILINE))
    assert {"service", "grid", "plot", "postgres", "dev"} <= extras


def test_cli_extras_table_matches_pyproject():
    """Each extra the command line names installs the modules it checks for."""
    declared = PYPROJECT["project"]["optional-dependencies"]
    # Distributions whose import name differs from the distribution's name.
    import_name = {"scikit-learn": "sklearn"}

    def dists(extra: str) -> set[str]:
        names = set()
        for req in declared[extra]:
            name = re.match(r"[A-Za-z0-9_.-]+", req).group(0).lower()
            inner = re.match(r"ptype\[(.+)\]", req)
            names |= ({d for e in inner.group(1).split(",") for d in dists(e.strip())}
                      if inner else {import_name.get(name, name)})
        return names

    for extra, modules in EXTRA_MODULES.items():
        assert set(modules) <= dists(extra), (extra, modules, dists(extra))
    assert EXTRA_MODULES["service"] and set(EXTRA_MODULES["plot"]) <= dists("service")


def test_sdist_builds_from_itself(dist):
    with tarfile.open(dist["sdist"]) as sdist:
        names = sdist.getnames()
    prefix = f"ptype-{VERSION}/"
    for wanted in ("pyproject.toml", "setup.py", "LICENSE", "README.md", "CHANGELOG.md",
                   "api/__init__.py", "api/templates/base.html", "ptype/py.typed",
                   "docs/conf.py"):
        assert prefix + wanted in names, wanted
    assert not any("/.data/" in n or "/.venv/" in n or "/_build/" in n for n in names)


@pytest.fixture(scope="module")
def installed(dist, tmp_path_factory) -> dict:
    """A fresh virtual environment with the wheel and no extras, probed; then [service]."""
    tmp = tmp_path_factory.mktemp("venv")
    venv = tmp / "venv"
    made = _run([sys.executable, "-m", "venv", venv], env=_clean_env())
    assert made.returncode == 0, made.stderr
    bin_dir = venv / "bin"
    python, exe = bin_dir / "python", bin_dir / "ptype"
    env = _clean_env(PTYPE_DATA_DIR=str(tmp / "data"))
    pip = [python, "-m", "pip", "install", "--no-compile", "--quiet"]
    core = _run([*pip, dist["wheel"]], cwd=tmp, env=env)
    assert core.returncode == 0, core.stdout[-3000:] + core.stderr[-3000:]
    probe = ("import json, sys, ptype; d = ptype.diagnose(sys.argv[1], members=10, seed=5); "
             "print(json.dumps({'file': ptype.__file__, 'version': ptype.__version__, "
             "'diagnosis': d.to_dict()}))")
    found = {
        "library": _run([python, "-c", probe, DEMO_SOUNDING], cwd=tmp, env=env),
        "cli": _run([exe, "diagnose", DEMO_SOUNDING, "--members", "10", "--seed", "5"],
                    cwd=tmp, env=env),
        "version": _run([exe, "--version"], cwd=tmp, env=env),
        "imports": {m: _run([python, "-c", f"import {m}"], cwd=tmp, env=env)
                    for m in ("flask", "gunicorn", "sqlalchemy", "distributed", "api")},
        "serve": _run([exe, "serve", "--port", "0"], cwd=tmp, env=env),
        "keys": _run([exe, "keys", "list"], cwd=tmp, env=env),
    }
    service = _run([*pip, f"{dist['wheel']}[service]"], cwd=tmp, env=env)
    assert service.returncode == 0, service.stdout[-3000:] + service.stderr[-3000:]
    found["served"] = _serve_and_diagnose(exe, tmp, env)
    return found


def _serve_and_diagnose(exe: Path, tmp: Path, env: dict) -> dict:
    """Start the installed ``ptype serve``, diagnose the demo sounding over HTTP, stop it."""
    port = free_port()
    log = open(tmp / "serve.log", "w+")  # noqa: SIM115 - closed below
    proc = subprocess.Popen([str(exe), "serve", "--port", str(port), "--workers", "1"],
                            cwd=tmp, env=env, stdout=log, stderr=subprocess.STDOUT,
                            start_new_session=True)
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline and proc.poll() is None:
            try:
                if requests.get(url + "/healthz", timeout=2).ok:
                    break
            except requests.ConnectionError:
                time.sleep(0.3)
        answer = requests.post(f"{url}/v1/diagnose?members=10&seed=5", timeout=120,
                               data=DEMO_SOUNDING.read_bytes(),
                               headers={"Content-Type": "application/json"})
        return {"status": answer.status_code, "body": answer.json()}
    except requests.ConnectionError as exc:
        log.seek(0)
        raise AssertionError(f"installed ptype serve did not answer: {exc}\n{log.read()}") \
            from None
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGTERM)
            try:
                proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                os.killpg(proc.pid, signal.SIGKILL)
                proc.wait(timeout=10)
        log.close()


def _expected() -> dict:
    """The diagnosis of the source tree's library with the same seed and members."""
    return json.loads(json.dumps(ptype.diagnose(str(DEMO_SOUNDING), members=10, seed=5)
                                 .to_dict()))


def test_core_install_diagnoses_like_the_source_tree(installed):
    run = installed["library"]
    assert run.returncode == 0, run.stderr[-3000:]
    found = json.loads(run.stdout)
    assert "site-packages" in found["file"] and str(ROOT) not in found["file"]
    assert found["version"] == VERSION
    assert found["diagnosis"] == _expected()


def test_core_install_command_line(installed):
    cli = installed["cli"]
    assert cli.returncode == 0, cli.stderr
    words = " ".join(cli.stdout.split())  # the table wraps long lines
    assert _expected()["ptype"] in words and ptype.CAUTION in words
    assert installed["version"].stdout.strip() == f"ptype {VERSION}"


def test_core_install_has_no_service_stack_and_no_top_level_api(installed):
    for module, run in installed["imports"].items():
        assert run.returncode != 0, f"import {module} works in a plain install"
        assert f"No module named '{module}'" in run.stderr


@pytest.mark.parametrize("command", ["serve", "keys"])
def test_service_commands_name_their_extra(installed, command):
    run = installed[command]
    assert run.returncode == 2
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1, run.stderr
    assert lines[0].startswith(f"ptype {command}: ") and "pip install 'ptype[service]'" in lines[0]
    assert "Traceback" not in run.stderr and run.stdout == ""


def test_service_extra_serves(installed):
    served = installed["served"]
    assert served["status"] == 200, served["body"]
    assert served["body"] == _expected()


@pytest.mark.parametrize(("argv", "extra"), [
    (["alerts"], "service"),
    (["keys", "list"], "service"),
    (["grid", "in.nc", "-o", "out.nc", "--scheduler", "tcp://127.0.0.1:1"], "grid"),
    (["grid", "in.nc", "-o", "out.nc", "--plot", "map.png"], "plot"),
    (["verify", "cases.csv", "--format", "html"], "plot"),
])
def test_options_that_need_an_extra_name_it(monkeypatch, capsys, tmp_path, argv, extra):
    """Without the extra's modules (as in a plain install) the command stops before any work."""
    from ptype import cli
    monkeypatch.chdir(tmp_path)
    monkeypatch.setattr(cli, "_installed", lambda module: False)
    assert cli.main(argv) == 2
    captured = capsys.readouterr()
    assert captured.out == "" and len(captured.err.strip().splitlines()) == 1
    assert captured.err.startswith(f"ptype {argv[0]}: ")
    assert f"pip install 'ptype[{extra}]'" in captured.err
    assert list(tmp_path.iterdir()) == []  # nothing written
    # With the extras installed (this environment) the same command line needs nothing more.
    monkeypatch.undo()
    assert cli.missing_extra(cli.build_parser().parse_args(argv)) is None


def test_a_module_missing_at_run_time_names_its_extra(monkeypatch, capsys, tmp_path):
    """A command that finds an optional module missing only while running still names it."""
    from ptype import cli
    monkeypatch.setenv("PTYPE_DATA_DIR", str(tmp_path))
    monkeypatch.setitem(sys.modules, "gunicorn", None)  # import gunicorn now fails
    monkeypatch.setitem(sys.modules, "gunicorn.app", None)
    monkeypatch.setitem(sys.modules, "gunicorn.app.base", None)
    monkeypatch.setattr(cli, "missing_extra", lambda args: None)  # skip the early check
    assert cli.main(["serve", "--port", "0"]) == 2
    err = capsys.readouterr().err
    assert err.strip() == cli.missing_extra_message("serve", "service", ["gunicorn"])
