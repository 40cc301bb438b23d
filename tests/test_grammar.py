"""Proof-reading of every generated sentence, with a small grammar list of our own.

The explanation, the consensus steps and every method's steps of every demo sounding
(soundings_demo/: single soundings, the site series and the verification profiles), the
alert texts raised on the demo storm, and the command line's error lines are checked
against the rules below.  The rules are ours (common practice of English proof-reading);
the spacing of units follows the SI Brochure (BIPM 2019, section 5.4.3: a space between
number and unit, also before % and °C; section number from memory).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

import ptype
from ptype.constants import CAUTION
from ptype.engine.methods import METHOD_LABELS, METHOD_NAMES

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "soundings_demo"

#: (pattern, what is wrong): each a mistake we have made or can make when building sentences.
MISTAKES: list[tuple[str, str]] = [
    (r"(?i)\b(\w+) \1\b", "doubled word"),
    (r"  ", "double space"),
    (r" [,.;:)]", "space before punctuation"),
    (r"\(\s*\)", "empty parentheses"),
    (r"\.\.(?!\.)", "doubled full stop"),
    (r",[^\s\d]", "no space after a comma"),
    (r"\btops at\b.*\band reaches\b", "'tops at ... and reaches' (the cloud top is at ...)"),
    (r"\b(?:nan|None|inf)\b", "a Python value in the text"),
    (r"\d(?:°C|hPa|J/kg|K·m|mm|cm|km|m/s|%)(?![\w/])", "number and unit not spaced"),
    (r"\d(?:m|K|h|s)\b", "number and unit not spaced"),
    (r"(?<![\d.])-\d", "hyphen for a minus sign"),
    (r"\brefreeze them\b", "'them' with nothing to refer to"),
    (r">=|<=|!=", "ASCII comparison sign in a sentence (use the true sign)"),
    (r":\s[^:;.,()]{1,25}:\s", "two colons a few words apart"),
    (r"(?<![+\u2212\d.,])(?:[1-9]\d*(?:\.\d+)?|0\.\d*[1-9]\d*) °C",
     "temperature without its sign"),
    (r"^But\b", "a sentence that only reads after another one"),
    # Subject-verb pairs we know are wrong.
    ((r"(?i)\b(?:drops|layers|methods|members|particles) "
      r"(?:stays|melts|refreezes|gives|is|was|has)\b"), "plural subject with a singular verb"),
    ((r"(?i)\b(?:the (?:cloud|air|layer|surface|snow|drop|profile|method)) "
      r"(?:reach|make|are|were|have|give|peak|melt|stay)\b"),
     "singular subject with a plural verb"),
    (r"(?i)\ba (?=[aeiou])(?!one|unit|uni|use)", "'a' before a vowel"),
    (r"\ban (?=[bcdfgjklmnpqrstvwxyz])(?!hour|h\b)", "'an' before a consonant"),
]


def problems(sentence: str) -> list[str]:
    """What is wrong with ``sentence`` by the rules above (empty when nothing)."""
    found = [f"{why}: {m.group(0)!r}" for pattern, why in MISTAKES
             for m in [re.search(pattern, sentence)] if m]
    if not sentence[:1].isupper() and not sentence[:1] in "τ(":
        found.append("does not start with a capital letter")
    if not sentence.rstrip().endswith((".", ".)")):
        found.append("does not end with a full stop")
    return found


def test_the_rules_catch_what_they_name():
    # Each rule fails on a sentence made to break it, and a good sentence passes.
    bad = ["The the cloud top is at 400 hPa.", "The cloud  top is at 400 hPa.",
           "The cloud tops at 400 hPa and reaches −30 °C.", "The layer is 300m deep.",
           "The air is 5°C.", "Drops stays liquid.", "The cloud reach 400 hPa.",
           "the cloud top is at 400 hPa.", "The cloud top is at 400 hPa",
           "The probability is nan.", "Snow is 70% likely.", "The air is -5.0 °C.",
           "A ice pellet falls.", "Less than needed to refreeze them.",
           "Rule liquid >= 0.9: rain.", "Surface warm area 8 J/kg: partial melting: rain.",
           "Surface air 4.2 °C: drizzle.", "But there is no cloud."]
    for sentence in bad:
        assert problems(sentence), sentence
    assert not problems("The cloud top is at 400 hPa, where the cloud reaches −29.5 °C: cold "
                        "enough to make ice (at or below −10 °C).")


def demo_profiles() -> list[Path]:
    """Every demo sounding: single files, the site series and the verification profiles."""
    paths = sorted((DEMO / "json").glob("*.json")) + sorted((DEMO / "csv").glob("*.csv"))
    paths += sorted((DEMO / "temp").glob("*.txt"))
    paths += sorted((DEMO / "series").glob("*/*.json"))
    paths += sorted((DEMO / "verification" / "profiles").glob("*"))
    return paths


def _sentences(result: dict) -> list[tuple[str, str]]:
    """(where, sentence) of a diagnosis dict: explanation, consensus and method steps."""
    out = [("explanation", s) for s in result["explanation"]]
    out += [(f"consensus.{s['rule']}", s["text"]) for s in result["consensus"]["steps"]]
    for name, method in result["methods"].items():
        out += [(f"{name}.{s['rule']}", s["text"]) for s in method["steps"]]
    return out


def test_every_demo_explanation_reads_well():
    paths = demo_profiles()
    assert len(paths) > 300
    errors = {}
    for start in range(0, len(paths), 64):
        batch = paths[start:start + 64]
        for path, d in zip(batch, ptype.diagnose_many(batch, members=0), strict=True):
            for where, sentence in _sentences(d.to_dict()):
                found = problems(sentence)
                if found:
                    errors.setdefault((where, "; ".join(found)), (path.name, sentence))
    assert not errors, "\n".join(f"{where} [{why}] {name}: {sentence}"
                                 for (where, why), (name, sentence) in sorted(errors.items()))


def test_every_method_has_a_label_for_its_own_judgement():
    assert set(METHOD_LABELS) == set(METHOD_NAMES)
    assert len(set(METHOD_LABELS.values())) == len(METHOD_LABELS)


def test_alert_texts_of_the_demo_storm_read_well():
    from ptype.clock import parse_time
    from ptype.readers import read_profile
    from ptype.roads.alerts.rules import evaluate_rules
    from ptype.roads.nowcast import build_timeline
    now = parse_time("2026-01-27T00:00:00Z")  # the demo's clock
    events = set()
    for site in sorted(p for p in (DEMO / "series").iterdir() if p.is_dir()):
        profiles = [read_profile(p) for p in sorted(site.glob("*.json"))]
        timeline = build_timeline(profiles, now=now, hours=24, step="1h", members=0)
        for cand in evaluate_rules(timeline, now, site.name):
            events.add(cand.event)
            for text in (cand.headline + ".", cand.description, cand.instruction):
                body = text.replace(CAUTION, "").strip()
                assert not problems(body), (cand.event, body, problems(body))
    assert len(events) >= 3  # freezing precipitation, snow, frost... all read


@pytest.mark.parametrize("args", [
    ["diagnose", "{tmp}/x.dat"], ["show", "-"], ["timeline", "{tmp}/x.dat"],
    ["grid", "{tmp}/x.dat", "-o", "{tmp}/missing/out.nc"],
])
def test_cli_errors_speak_cli(tmp_path, args):
    import subprocess
    import sys
    (tmp_path / "x.dat").write_text("hello\n")
    argv = [a.replace("{tmp}", str(tmp_path)) for a in args]
    r = subprocess.run([sys.executable, "-m", "ptype", *argv], input="hello\n", text=True,
                       capture_output=True, timeout=60, check=False,
                       env={"PYTHONPATH": str(ROOT), "PATH": "/usr/bin:/bin"})
    assert r.returncode == 2 and len(r.stderr.splitlines()) == 1, r.stderr
    line = r.stderr.strip()
    assert "format=" not in line and "pass " not in line, line
    if args[0] in ("diagnose", "show"):
        assert "--input-format" in line
    # Error lines name paths and options (".json", "-o"): only the word rules apply.
    message = line.split(": error: ", 1)[1]
    assert not [why for pattern, why in MISTAKES[:2] if re.search(pattern, message)], line


def test_a_temp_verdict_names_station_and_time(client):
    # soundings_demo/temp/mistleby-bridge_20260127T1600.txt: station 99915, YYGG 2716 (day 27,
    # 16 UTC), WMO FM 35 section 1 (WMO-No. 306, Manual on Codes, from memory).
    text = (DEMO / "temp" / "mistleby-bridge_20260127T1600.txt").read_text()
    body = client.post("/v1/diagnose?members=0", data=text, content_type="text/plain").get_json()
    assert body["site"]["id"] == "99915"
    assert body["when"].startswith("day 27 of the month, 16:00 UTC")
    import subprocess
    import sys
    r = subprocess.run([sys.executable, "-m", "ptype", "diagnose", "--members", "0",
                        str(DEMO / "temp" / "mistleby-bridge_20260127T1600.txt")],
                       capture_output=True, text=True, timeout=60, check=False,
                       env={"PYTHONPATH": str(ROOT), "PATH": "/usr/bin:/bin"})
    first = r.stdout.splitlines()[0]
    assert first.startswith("station 99915 - valid day 27 of the month, 16:00 UTC"), first
    # Each method's row says whose judgement it is; the explanation is introduced as overall.
    assert "  FZRA    Cloud-top method: " in r.stdout
    assert "Overall, all methods together:" in r.stdout


@pytest.mark.parametrize("args,start", [
    (["timeline", "{series}", "--step", "7x"], "--step '7x'"),
    (["timeline", "{series}", "--now", "tomorrow"], "--now 'tomorrow'"),
    (["diagnose", "{series}", "--members", "-1"], "--members -1"),
])
def test_cli_errors_name_the_option(args, start):
    import subprocess
    import sys
    series = str(min((DEMO / "series").glob("*/*.json")))
    argv = [a.replace("{series}", series) for a in args]
    r = subprocess.run([sys.executable, "-m", "ptype", *argv], text=True, capture_output=True,
                       timeout=60, check=False,
                       env={"PYTHONPATH": str(ROOT), "PATH": "/usr/bin:/bin"})
    assert r.returncode == 2 and r.stderr.startswith(f"ptype {args[0]}: error: {start}"), r.stderr
