"""Snapshot of what ptype answers, to show that a restructuring changed no behaviour.

Writes one JSON file holding, for fixed inputs and seeds:

* ``diagnose``: ``ptype.diagnose(...).to_dict()`` of every demo sounding (JSON, CSV, TEMP),
  with 30 members, both wet-bulb kinds;
* ``many``: ``ptype.diagnose_many`` over the demo JSON soundings;
* ``grid``: every output variable of the demo grid with 4 members (sha256 of the bytes);
* ``timeline``: each demo site's series as a timeline at the demo clock;
* ``verify``: the demo verification summary;
* ``api``: status, media type and body (JSON bodies whole, others by sha256) of a fixed list
  of requests against the Flask application on a fresh demo store.

Usage::

    python bench/behaviour_snapshot.py OUT.json           # take a snapshot
    python bench/behaviour_snapshot.py --compare A.json B.json

``--compare`` lists every path whose value differs and exits 1 if any does.  Only public
names are used, so the same script runs before and after a change of the package layout.
"""

from __future__ import annotations

import argparse
import hashlib
import importlib
import json
import os
import re
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "soundings_demo"
NOW = "2026-01-27T00:00:00Z"


def _jsonable(value):
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return _jsonable(value.tolist())
    if isinstance(value, (np.floating, float)):
        v = float(value)
        return v if np.isfinite(v) else repr(v)
    if isinstance(value, np.integer):
        return int(value)
    return value


def _demo_files() -> list[Path]:
    files = sorted((DEMO / "json").glob("*.json")) + sorted((DEMO / "csv").glob("*.csv"))
    return files + sorted((DEMO / "temp").glob("*.txt"))


def snap_diagnose() -> dict:
    """``ptype.diagnose`` of every demo sounding, both wet-bulb kinds, 30 members."""
    import ptype
    out = {}
    for path in _demo_files():
        for kind in ("isobaric", "adiabatic"):
            d = ptype.diagnose(str(path), members=30, seed=7, wetbulb=kind)
            out[f"{path.parent.name}/{path.name}/{kind}"] = d.to_dict()
    return out


def snap_many() -> dict:
    """``ptype.diagnose_many`` over the demo JSON soundings."""
    import ptype
    paths = [str(p) for p in sorted((DEMO / "json").glob("*.json"))]
    return {str(i): d.to_dict() for i, d in enumerate(ptype.diagnose_many(paths, members=20,
                                                                           seed=3))}


def snap_grid() -> dict:
    """Every output variable of the diagnosed demo grid, by sha256 of its bytes."""
    from ptype import grid
    ds = grid.open_grid(str(DEMO / "grid" / "demo_grid.nc"))
    out = grid.diagnose_dataset(ds, members=4, seed=1, per_method=True).compute()
    result = {}
    for name in sorted(out.variables):
        data = np.ascontiguousarray(out[name].values)
        digest = hashlib.sha256(data.tobytes()).hexdigest() if data.dtype.kind != "O" else \
            hashlib.sha256(repr(data.tolist()).encode()).hexdigest()
        result[name] = {"dims": list(out[name].dims), "dtype": str(data.dtype), "sha256": digest,
                        "attrs": _jsonable({k: v for k, v in out[name].attrs.items()})}
    result["_attrs"] = _jsonable({k: v for k, v in out.attrs.items() if k != "history"})
    return result


def _nowcast():
    for name in ("ptype.roads.nowcast", "ptype.roads.nowcast"):
        try:
            return importlib.import_module(name)
        except ImportError:
            continue
    raise ImportError("no nowcast module")


def snap_timeline() -> dict:
    """Each demo site's series as a timeline at the demo clock."""
    import ptype
    from ptype.clock import parse_time
    nowcast = _nowcast()
    manifest = json.loads((DEMO / "series" / "manifest.json").read_text())
    out = {}
    for site, entry in sorted(manifest["sites"].items()):
        profiles = [ptype.read_profile(str(DEMO / "series" / f)) for f in entry["files"]]
        out[site] = nowcast.build_timeline(profiles, now=parse_time(NOW), members=10, seed=2)
    return out


def snap_verify() -> dict:
    """The verification report of the demo cases."""
    from ptype.verify import read_manifest, run_verification
    cases = read_manifest(DEMO / "verification" / "cases.csv")
    result = run_verification(cases, members=10, seed=5)
    return result if isinstance(result, dict) else getattr(result, "to_dict", dict)()


API_REQUESTS = [
    ("GET", "/healthz", None, None),
    ("GET", "/v1/demo", None, None),
    ("GET", "/v1/sites", None, None),
    ("GET", "/v1/sites/1", None, None),
    ("GET", "/v1/sites/1/timeline", None, None),
    ("GET", "/v1/sites/2/timeline?hours=6&step=30min&members=5&seed=1", None, None),
    ("GET", "/v1/sites/999/timeline", None, None),
    ("GET", "/v1/alerts", None, None),
    ("GET", "/v1/alerts.atom", None, None),
    ("GET", "/openapi.json", None, None),
    ("GET", "/v1/nothing", None, None),
    ("POST", "/v1/diagnose?members=abc", "json/korrim-pass_20260127T1000.json", None),
    ("POST", "/v1/diagnose?nosuch=1", "json/korrim-pass_20260127T1000.json", None),
    ("POST", "/v1/diagnose", None, ("application/json", b"{not json")),
    ("POST", "/v1/diagnose", None, ("application/json", b'{"levels": []}')),
    ("POST", "/v1/sites", None, ("application/json", b"{}")),
]


UUID = re.compile(r"[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}")


def _normalised(body):
    """JSON body with random alert ids masked and alert lists in a fixed order."""
    body = json.loads(UUID.sub("<uuid>", json.dumps(body)))
    if isinstance(body, dict) and isinstance(body.get("alerts"), list):
        body["alerts"] = sorted(body["alerts"], key=lambda a: json.dumps(a, sort_keys=True))
    return body


def snap_api() -> dict:
    """Status, media type and body of fixed requests to a fresh demo service."""
    with tempfile.TemporaryDirectory() as tmp:
        os.environ["PTYPE_DATA_DIR"] = tmp
        from ptype.api import create_app
        app = create_app({"PTYPE_DATA_DIR": tmp, "TESTING": True, "PTYPE_DEMO": True,
                          "PTYPE_NOW": NOW, "PTYPE_ALERT_MEMBERS": 5})
        client = app.test_client()
        requests = list(API_REQUESTS)
        for path in _demo_files():
            media = {"json": "application/json", "csv": "text/csv"}.get(path.parent.name,
                                                                       "text/plain")
            requests.append(("POST", "/v1/diagnose?members=20&seed=4", None,
                             (media, path.read_bytes())))
        batch = [json.loads(p.read_text()) for p in sorted((DEMO / "json").glob("*.json"))]
        requests.append(("POST", "/v1/diagnose/batch?members=10&seed=2", None,
                         ("application/json", json.dumps({"profiles": batch}).encode())))
        out = {}
        for i, (method, url, demo_file, body) in enumerate(requests):
            kwargs = {}
            if demo_file:
                kwargs = {"data": (DEMO / demo_file).read_bytes(),
                          "content_type": "application/json"}
            elif body:
                kwargs = {"data": body[1], "content_type": body[0]}
            r = client.open(url, method=method, **kwargs)
            entry = {"status": r.status_code, "mimetype": r.mimetype}
            if r.is_json:
                entry["json"] = _normalised(r.get_json())
            else:
                # Alert ids are random and alerts issued together have no order: ids are
                # masked and the lines compared as a sorted multiset.
                text = UUID.sub("<uuid>", r.get_data(as_text=True)).replace("<entry>", "\n")
                lines = sorted(text.splitlines())
                entry["sha256"] = hashlib.sha256("\n".join(lines).encode()).hexdigest()
            out[f"{i:02d} {method} {url} {demo_file or (body and body[0]) or ''}"] = entry
        from ptype.api.sites import store_for
        store_for(app).dispose()
    return out


SECTIONS = {"diagnose": snap_diagnose, "many": snap_many, "grid": snap_grid,
            "timeline": snap_timeline, "verify": snap_verify, "api": snap_api}


def _diff(a, b, path="", out=None):
    out = [] if out is None else out
    if isinstance(a, dict) and isinstance(b, dict):
        for k in sorted(set(a) | set(b)):
            if k not in a or k not in b:
                out.append(f"{path}/{k}: only in {'second' if k not in a else 'first'}")
            else:
                _diff(a[k], b[k], f"{path}/{k}", out)
    elif isinstance(a, list) and isinstance(b, list) and len(a) == len(b):
        for i, (x, y) in enumerate(zip(a, b)):
            _diff(x, y, f"{path}[{i}]", out)
    elif a != b:
        out.append(f"{path}: {str(a)[:120]!s} != {str(b)[:120]!s}")
    return out


def main(argv: list[str] | None = None) -> int:
    """Take a snapshot, or compare two; exit status 1 when they differ."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("paths", nargs="+")
    parser.add_argument("--compare", action="store_true")
    parser.add_argument("--only", help="comma-separated sections: " + ", ".join(SECTIONS))
    args = parser.parse_args(argv)
    if args.compare:
        a, b = (json.loads(Path(p).read_text()) for p in args.paths)
        diffs = _diff(a, b)
        for line in diffs[:200]:
            print(line)
        print(f"{len(diffs)} differences" if diffs else "identical")
        return 1 if diffs else 0
    os.environ.setdefault("PTYPE_NOW", NOW)
    names = args.only.split(",") if args.only else list(SECTIONS)
    snapshot = {name: _jsonable(SECTIONS[name]()) for name in names}
    Path(args.paths[0]).write_text(json.dumps(snapshot, indent=1, sort_keys=True))
    print(f"wrote {args.paths[0]} ({', '.join(names)})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
