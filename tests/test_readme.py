"""The README's "Your first hour" walk-through, run command by command as written.

The fenced ``sh`` block of that section is parsed from README.md (so the README cannot drift
from the product) and each line is run in a scratch folder holding the demo data, against a
real ``ptype serve --demo`` started the way ``make run`` starts it, with its own data folder.
Each command must succeed with no traceback and no warning, every text output must carry the
caution, and the service's store must be the same before and after the walk-through.
"""

from __future__ import annotations

import os
import re
import shlex
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from api_support import free_port, store_dump

from ptype.constants import CAUTION
from ptype.store import DB_FILENAME

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")
SECTION = "## Your first hour"


def walkthrough_commands() -> list[str]:
    """The command lines of the first fenced ``sh`` block of the section (comments dropped)."""
    start = README.index(SECTION)
    end = README.find("\n## ", start + len(SECTION))
    block = re.search(r"```sh\n(.*?)```", README[start:end], flags=re.DOTALL)
    assert block, f"no ```sh block in {SECTION!r}"
    lines = [line.strip() for line in block.group(1).splitlines()]
    return [line for line in lines if line and not line.startswith("#")]


def _env(data_dir: Path) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items()
           if k not in ("PTYPE_NOW", "PTYPE_DATABASE_URL", "PTYPE_DEBUG", "PTYPE_DEMO")}
    # Warnings of any Python code we run are shown, so that the test can refuse them.
    return {**env, "PYTHONPATH": str(ROOT), "PTYPE_DATA_DIR": str(data_dir),
            "PYTHONWARNINGS": "default"}


def _argv(line: str, cwd: Path) -> list[str]:
    """The line as an argument list: ``ptype`` (activated or ``.venv/bin/ptype``) becomes
    this interpreter's ``-m ptype``; shell globs are expanded as a shell would."""
    import glob
    words = shlex.split(line)
    assert words[0] in ("ptype", ".venv/bin/ptype"), f"unexpected command in the README: {line}"
    rest = []
    for word in words[1:]:
        matches = sorted(glob.glob(word, root_dir=cwd)) if any(c in word for c in "*?[") else []
        assert matches or not any(c in word for c in "*?["), f"{word} matches no file"
        rest.extend(matches or [word])
    return [sys.executable, "-m", "ptype", *rest]


@pytest.fixture(scope="module")
def service(tmp_path_factory):
    """A real ``ptype serve --demo`` on a free port with a fresh data folder, as make run."""
    data_dir = tmp_path_factory.mktemp("first-hour-data")
    port = free_port()
    proc = subprocess.Popen([sys.executable, "-m", "ptype", "serve", "--demo", "--port",
                             str(port), "--workers", "1"], env=_env(data_dir),
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)
    try:
        banner = proc.stdout.readline()  # printed once the server listens
        assert "ptype serving on" in banner, proc.stderr.read() if proc.poll() else banner
        deadline = time.monotonic() + 60
        while not (data_dir / DB_FILENAME).exists() and time.monotonic() < deadline:
            time.sleep(0.2)
        yield data_dir
    finally:
        os.killpg(proc.pid, signal.SIGTERM)
        proc.wait(timeout=30)
        proc.stdout.close()
        proc.stderr.close()


def test_readme_says_how_to_reach_the_command():
    section = README[README.index(SECTION):]
    assert "source .venv/bin/activate" in section and ".venv/bin/ptype" in section


def test_first_hour_runs_as_written(service, tmp_path):
    commands = walkthrough_commands()
    assert len(commands) >= 8
    (tmp_path / "soundings_demo").symlink_to(ROOT / "soundings_demo")
    before = store_dump(service)
    for line in commands:
        if line.startswith(("source ", ". ")):
            continue  # activation: this test calls the interpreter of the environment
        r = subprocess.run(_argv(line, tmp_path), cwd=tmp_path, env=_env(service),
                           capture_output=True, text=True, timeout=300, check=False)
        assert r.returncode == 0, f"{line}\n{r.stderr[-2000:]}"
        assert "Traceback" not in r.stderr, f"{line}\n{r.stderr[-2000:]}"
        assert not re.search(r"warn", r.stderr, flags=re.IGNORECASE), f"{line}\n{r.stderr[-2000:]}"
        words = shlex.split(line)
        if "--version" not in words and "json" not in words:
            assert CAUTION in " ".join(r.stdout.split()), f"{line}: no caution in its output"
        if words[1:2] == ["alerts"] and "json" not in words:
            assert "(demo clock" in r.stdout and "\nactive " in r.stdout, r.stdout
    assert (tmp_path / "first_hour.nc").is_file() and (tmp_path / "first_hour.png").is_file()
    assert store_dump(service) == before, "the walk-through changed the service's store"
