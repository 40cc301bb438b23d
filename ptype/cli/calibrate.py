"""``ptype calibrate MANIFEST -o FILE``: fit calibrated probabilities on paired cases."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

import numpy as np

from ptype.errors import OptionError


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``calibrate`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser(
        "calibrate", help="fit calibrated probabilities on paired cases",
        description="Diagnose every profile of a manifest of paired cases (the same manifest "
                    "ptype verify reads) with Monte-Carlo members and fit a multinomial "
                    "logistic calibration of the type probabilities to the observed weather. "
                    "Apply it with --calibration (ptype diagnose, ptype verify) or "
                    "PTYPE_CALIBRATION (the service). The fit is only as good as the cases.")
    p.add_argument("manifest", help="manifest file (.csv or .json); profile paths are relative "
                                    "to its folder")
    p.add_argument("-o", "--output", required=True, metavar="FILE",
                   help="where to write the calibration (JSON)")
    p.add_argument("--members", type=int, default=50, metavar="N",
                   help="Monte-Carlo members per case (default: 50; use the number you will "
                        "diagnose with)")
    p.add_argument("--seed", type=int, default=0, metavar="S",
                   help="seed of the Monte-Carlo members (default: 0)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """Fit the calibration and write it; a one-line summary on stderr."""
    from ptype.engine.calibration import features
    from ptype.verify.calibration import FOLDS, cross_validated, fit_calibration
    from ptype.verify.manifest import read_manifest
    from ptype.verify.observations import parse_observation
    from ptype.verify.report import diagnose_cases, ranked_score
    if args.members < 1:
        raise OptionError(f"--members {args.members}: a calibration needs 1 or more",
                          field="members")
    from ptype.cli.checks import writable_file
    out = writable_file(args.output, "--output")
    cases = read_manifest(args.manifest)
    parsed = [parse_observation(c.observed) for c in cases]
    kept = [i for i, ob in enumerate(parsed) if not ob.excluded]
    profiles = [cases[i].load_profile() for i in kept]
    codes, raw = diagnose_cases(profiles, members=args.members, seed=args.seed)
    x = features(codes, raw)
    observed = np.asarray([int(parsed[i].code) for i in kept], dtype=np.int64)
    held = cross_validated(x, observed, codes["possible"], seed=args.seed)
    cv = {"folds": FOLDS, "rps_raw": ranked_score(raw, observed),
          "rps_calibrated": ranked_score(held, observed)}
    cal = fit_calibration(x, observed, source=Path(args.manifest).name,
                          extra={"members": args.members, "seed": args.seed, "cv": cv})
    out.write_text(json.dumps(cal.to_dict(), indent=1) + "\n", encoding="utf-8")
    print(f"wrote {out}: {cal.n_cases} cases, types {', '.join(cal.classes)}; held-out RPS "
          f"{cv['rps_raw']:.3f} raw -> {cv['rps_calibrated']:.3f} calibrated",
          file=sys.stderr)
    return 0
