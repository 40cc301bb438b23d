"""``ptype diagnose PATH...``: the type at the ground, its probability and the reasons."""

from __future__ import annotations

import argparse
import json
import shutil
import sys

from ptype.constants import CAUTION
from ptype.engine.methods import method_label
from ptype.engine.probability import DEFAULT_MEMBERS

BAR_WIDTH = 30


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``diagnose`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser("diagnose", help="diagnose the precipitation type of one or more profiles",
                       description="Diagnose the precipitation type reaching the ground for each "
                                   "profile (JSON, CSV, WMO TEMP or NetCDF), with probabilities "
                                   "and the reasoning of every method.")
    p.add_argument("paths", nargs="+", metavar="PATH", help="profile files (- for standard input)")
    p.add_argument("--format", choices=("table", "json"), default="table", help="output format")
    p.add_argument("--input-format", choices=("json", "csv", "temp", "netcdf"), default=None,
                   help="format of the profiles (default: from the file name or content)")
    p.add_argument("--members", type=int, default=DEFAULT_MEMBERS,
                   help=f"Monte-Carlo members for the probabilities (default {DEFAULT_MEMBERS}; "
                        "0 = none)")
    p.add_argument("--seed", type=int, default=None,
                   help="random seed for reproducible probabilities")
    p.add_argument("--methods", default=None, help="comma-separated subset of methods")
    p.add_argument("--wetbulb", choices=("isobaric", "adiabatic"), default="isobaric",
                   help="wet-bulb reported in the profile and wet-bulb layers")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """Diagnose every profile named in ``args`` and print the result; exit status."""
    from ptype.engine.diagnosis import diagnose
    out = []
    for path in args.paths:
        for label, source in _sources(path, args.input_format):
            d = diagnose(source, members=args.members, seed=args.seed, methods=args.methods,
                         wetbulb=args.wetbulb)
            result = d.to_dict()
            result["source"] = label
            out.append(result)
        out.extend(_ensemble_results(path, args))
    if args.format == "json":
        print(json.dumps(out[0] if len(out) == 1 else out, indent=2, ensure_ascii=False))
        return 0
    for k, result in enumerate(out):
        if k:
            print()
        print(render_table(result))
    return 0


def _sources(path: str, input_format: str | None = None):
    """``(label, profile or text)`` for every profile of one argument: a BUFR file with
    several reports gives one per report (``PATH#k``); an ensemble NetCDF file gives none
    here (see :func:`_ensemble_results`).  ``input_format`` (``--input-format``) names the
    format instead of the file name or content."""
    from ptype.readers import read_profile
    if path == "-":
        return [(path, read_profile(sys.stdin.read(), format=input_format))]
    if input_format is not None and input_format != "netcdf":
        return [(path, read_profile(path, format=input_format))]
    from ptype.readers import read_profiles
    from ptype.readers.netcdf_format import member_count
    if path.lower().endswith((".nc", ".nc4", ".cdf")) and member_count(path) > 1:
        return []
    profiles = read_profiles(path)
    if len(profiles) == 1:
        return [(path, profiles[0])]
    return [(f"{path}#{k}", pr) for k, pr in enumerate(profiles, start=1)]


def _ensemble_results(path: str, args: argparse.Namespace) -> list[dict]:
    """A multi-member profile file: every member diagnosed, the probabilities the fractions
    of the members of each type (:func:`ptype.engine.ensemble_diagnosis.diagnose_ensemble`)."""
    if path == "-" or not path.lower().endswith((".nc", ".nc4", ".cdf")):
        return []
    from ptype.readers.netcdf_format import member_count, read_member_documents
    if member_count(path) <= 1:
        return []
    from ptype.engine.ensemble_diagnosis import diagnose_ensemble
    result = diagnose_ensemble(read_member_documents(path), members=args.members,
                               seed=args.seed, methods=args.methods, wetbulb=args.wetbulb)
    result["source"] = path
    return [result]


def render_table(r: dict) -> str:
    """A readable terminal summary of one diagnosis dict."""
    width = min(shutil.get_terminal_size((100, 24)).columns, 110)
    lines = []
    title = title_line(r)
    lines.append(title)
    lines.append("=" * min(len(title), width))
    head = f"{r['ptype']}  {r['ptype_label']}"
    if r.get("probability") is not None:
        head += (f"   p = {r['probability']:.2f}   {r['confidence']} confidence "
                 f"({r['members']} members)")
    lines.append(head)
    if r["probabilities"]:
        lines.append("")
        for code, p in r["probabilities"].items():
            bar = "#" * max(1, round(p * BAR_WIDTH)) if p > 0 else ""
            lines.append(f"  {code:<7} {bar:<{BAR_WIDTH}} {p:5.2f}")
    lines.append("")
    lines.append(f"  {'type':<7} each method's own judgement (the rule that fired)")
    for name, m in r["methods"].items():
        fired = [s for s in m["steps"] if s["rule"] == m.get("rule")]
        text = (fired or m["steps"] or [{"text": ""}])[-1]["text"]
        code = m["ptype"] or "-"
        lines.append(f"  {code:<7} {_clip(f'{method_label(name)}: {text}', width - 10)}")
    lines.append("")
    lines.append("  Overall, all methods together:")
    for sentence in r["explanation"]:
        lines.append(_wrap(sentence, width, "  "))
    for w in r.get("warnings", []):
        lines.append(_wrap("note: " + w, width, "  "))
    lines.append("")
    lines.append(_wrap(CAUTION, width, ""))
    return "\n".join(lines)


def title_line(r: dict) -> str:
    """The verdict's first line: the place (site name, else station or site id), the time
    and the file."""
    site = r.get("site") or {}
    place = site.get("name") or (f"station {site['id']}" if site.get("id") else None)
    parts = [p for p in (place, r.get("when") and f"valid {r['when']}", r.get("source")) if p]
    return " - ".join(parts)


def _clip(text: str, n: int) -> str:
    return text if len(text) <= n else text[: max(n - 3, 10)] + "..."


def _wrap(text: str, width: int, indent: str) -> str:
    import textwrap
    return textwrap.fill(text, width=width, initial_indent=indent, subsequent_indent=indent + "  ")
