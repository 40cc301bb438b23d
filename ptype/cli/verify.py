"""``ptype verify MANIFEST``: score the diagnoses of paired cases against observed weather."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from ptype.errors import OptionError

FORMATS = ("table", "json", "html")
EXTENSIONS = {"table": "txt", "json": "json", "html": "html"}


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``verify`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser(
        "verify", help="score diagnoses against observed present weather",
        description="Diagnose every profile of a manifest of paired cases (CSV or JSON with "
                    "fields profile, observed, valid_time, site) and score the consensus and "
                    "each method against the observed present weather: contingency table, "
                    "accuracy, Heidke, Peirce and Gerrity scores, POD/FAR/CSI/bias per class, "
                    "and for the Monte-Carlo probabilities Brier and ranked probability scores "
                    "and a reliability diagram.")
    p.add_argument("manifest", help="manifest file (.csv or .json); profile paths are relative "
                                    "to its folder")
    p.add_argument("--format", choices=FORMATS, default="table", help="output format "
                   "(default: table)")
    p.add_argument("--out", metavar="DIR", default=None,
                   help="write the report (verification.txt/.json/.html, and the PNG figures "
                        "for html) into DIR instead of printing it")
    p.add_argument("--members", type=int, default=50, metavar="N",
                   help="Monte-Carlo members per case for the probabilities; 0 for none "
                        "(default: 50)")
    p.add_argument("--seed", type=int, default=0, metavar="S",
                   help="seed of the Monte-Carlo members (default: 0, so reports repeat)")
    p.add_argument("--methods", default=None, metavar="NAMES",
                   help="comma-separated methods to run (default: all)")
    p.add_argument("--calibration", default=None, metavar="FILE",
                   help="calibrate the probabilities with FILE (from ptype calibrate)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """Verify the cases of a manifest and print or write the report; exit status."""
    from ptype.verify.manifest import read_manifest
    from ptype.verify.report import make_figures, render_html, render_table, run_verification
    if args.members < 0:
        raise OptionError(f"--members {args.members}: expected 0 or more", field="members")
    out_dir = Path(args.out) if args.out else None
    if out_dir is not None:
        from ptype.cli.checks import writable_folder
        writable_folder(out_dir, "--out")
    calibration = None
    if args.calibration:
        from ptype.engine.calibration import Calibration
        calibration = Calibration.load(args.calibration)
    cases = read_manifest(args.manifest)
    report = run_verification(cases, members=args.members, seed=args.seed,
                              methods=args.methods, source=str(args.manifest),
                              calibration=calibration)
    if out_dir is not None:
        out_dir.mkdir(parents=True, exist_ok=True)
    if args.format == "json":
        text = json.dumps(report, indent=2) + "\n"
    elif args.format == "table":
        text = render_table(report)
    else:
        figures = make_figures(report)
        if out_dir is not None:
            for name, png in figures.items():
                (out_dir / f"{name}.png").write_bytes(png)
        # The HTML embeds the figures as data URIs, so the one file stands alone.
        text = render_html(report, figures)
    if out_dir is None:
        sys.stdout.write(text)
    else:
        path = out_dir / f"verification.{EXTENSIONS[args.format]}"
        path.write_text(text, encoding="utf-8")
        print(f"wrote {path}", file=sys.stderr)
    return 0
