"""``ptype verify`` command line (ptype/cli/verify.py) on a few invented demo cases."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

import ptype
from ptype.cli import main

DEMO = Path(__file__).resolve().parents[1] / "soundings_demo" / "verification"
METHODS = "bourgouin,cloud_top"


@pytest.fixture
def manifest(tmp_path):
    rows = [("case_001.json", "SHSN BR"), ("case_002.json", "-FZRA"), ("case_003.json", "UP"),
            ("case_004.json", "RA"), ("case_005.json", "FZRA PL"), ("case_006.json", "SN")]
    lines = ["profile,observed"] + [f"{DEMO / 'profiles' / p},{o}" for p, o in rows]
    path = tmp_path / "cases.csv"
    path.write_text("\n".join(lines) + "\n")
    return path


def test_verify_json_stdout(manifest, capsys):
    assert main(["verify", str(manifest), "--format", "json", "--members", "4",
                 "--methods", METHODS]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["n"] == 5 and report["excluded"]["count"] == 1
    assert set(report["methods"]) == {"bourgouin", "cloud_top"}
    assert {"table", "accuracy", "heidke", "peirce", "gerrity", "classes", "brier", "rps",
            "reliability"} <= set(report["consensus"])
    case = report["cases"][0]
    assert {"profile", "observed_raw", "observed", "predicted", "methods"} <= set(case)
    assert report["caution"] == ptype.CAUTION


def test_verify_table_stdout_has_caution(manifest, capsys):
    assert main(["verify", str(manifest), "--members", "0", "--methods", METHODS]) == 0
    out = capsys.readouterr().out
    assert "contingency table" in out and ptype.CAUTION in out


def test_verify_html_out_dir_writes_report_and_figures(manifest, tmp_path, capsys):
    out = tmp_path / "report"
    assert main(["verify", str(manifest), "--format", "html", "--out", str(out),
                 "--members", "4", "--methods", METHODS]) == 0
    page = (out / "verification.html").read_text()
    assert ptype.CAUTION in page and "data:image/png;base64," in page
    assert (out / "reliability.png").read_bytes().startswith(b"\x89PNG")
    assert (out / "skill.png").read_bytes().startswith(b"\x89PNG")
    assert "wrote" in capsys.readouterr().err


@pytest.mark.parametrize("args, message", [
    (["--members", "-1"], "--members -1: expected 0 or more"),
    (["--methods", "nosuch"], "unknown method 'nosuch'"),
])
def test_verify_bad_options_exit_2_with_one_line(manifest, capsys, args, message):
    assert main(["verify", str(manifest), *args]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err and err.count("\n") == 1


def test_verify_bad_manifest_names_line_and_field(tmp_path, capsys):
    path = tmp_path / "m.csv"
    path.write_text("profile,observed\nmissing.json,RA\n")
    assert main(["verify", str(path)]) == 2
    err = capsys.readouterr().err
    assert "m.csv line 2: field 'profile': no such file 'missing.json'" in err


def test_verify_out_is_a_file(manifest, tmp_path, capsys):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    assert main(["verify", str(manifest), "--members", "0", "--methods", METHODS,
                 "--out", str(blocker)]) == 2
    assert "is not a folder" in capsys.readouterr().err
