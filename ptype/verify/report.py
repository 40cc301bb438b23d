"""Run a verification over paired cases and write it as JSON, a text table or HTML.

:func:`run_verification` parses the observations, diagnoses every profile in one
vectorised pass (:func:`ptype.engine.run.run_columns` on stacked
:class:`~ptype.engine.columns.Columns`, with the Monte-Carlo members) and scores the consensus
and every method with :mod:`ptype.verify.scores`.  The renderers only format that dict; the
HTML page comes from the Jinja2 template ``templates/report.html`` with autoescape on.

Category order
--------------
Tables, the Gerrity score and the ranked probability score use one ordered list of
categories, :data:`ORDER` (ours, documented in docs/verification.md): decreasing ice
fraction of what reaches the ground - all ice (SN, never melted; PL, melted and
refrozen), mixed (RASN, FZRAPL, RAPL: snow-bearing first, freezing before
non-freezing), all liquid (FZRA, FZDZ, RA, DZ: freezing before non-freezing, rain
before drizzle) - and NONE last, next to drizzle, the lightest precipitation.
"""

from __future__ import annotations

import base64
import functools
import io
import math
from collections import Counter
from collections.abc import Iterable, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from ptype import __version__
from ptype.codes import LABELS, NO_RESULT, Code
from ptype.constants import CAUTION
from ptype.engine.methods import METHOD_NAMES
from ptype.style import FIGURE, TYPE_STYLES
from ptype.style.css import palette_css
from ptype.verify import scores as sc
from ptype.verify.manifest import Case
from ptype.verify.observations import parse_observation

if TYPE_CHECKING:
    from ptype.profile import Profile

ORDER: tuple[Code, ...] = (Code.SN, Code.PL, Code.RASN, Code.FZRAPL, Code.RAPL, Code.FZRA,
                           Code.FZDZ, Code.RA, Code.DZ, Code.NONE)
#: Position of each code in :data:`ORDER`, indexed by the code's integer value.
_POS = np.array([ORDER.index(Code(v)) for v in range(len(Code))])
#: Perturbed columns diagnosed per batch (bounds memory); batch ``k`` draws its members from
#: the seed ``[seed, k]``, so a report is reproducible for a given seed.
MEMBER_BATCH_COLUMNS = 20_000
RELIABILITY_BINS = 10
DEFAULT_SEED = 0


def _num(x, digits: int = 4):
    """JSON-ready number: None for nan/inf, rounded float otherwise."""
    if x is None:
        return None
    x = float(x)
    return round(x, digits) if math.isfinite(x) else None


# --------------------------------------------------------------------------- scoring

def categorical_scores(predicted: np.ndarray, observed: np.ndarray,
                       categories: Sequence[Code]) -> dict[str, Any]:
    """Scores of predicted vs observed code arrays over ``categories`` (a subset of ORDER,
    in order, holding every code that occurs)."""
    index = {c: i for i, c in enumerate(categories)}
    f = np.array([index[Code(int(v))] for v in predicted], dtype=np.int64)
    o = np.array([index[Code(int(v))] for v in observed], dtype=np.int64)
    table = sc.contingency_table(f, o, len(categories))
    collapsed, kept = sc.collapse_unobserved(table)
    cls = sc.class_scores(table)
    per_class = {}
    for i, c in enumerate(categories):
        per_class[c.name] = {
            "n_observed": int(cls["n_observed"][i]), "n_forecast": int(cls["n_forecast"][i]),
            "hits": int(cls["hits"][i]), "misses": int(cls["misses"][i]),
            "false_alarms": int(cls["false_alarms"][i]),
            "pod": _num(cls["pod"][i]), "far": _num(cls["far"][i]), "csi": _num(cls["csi"][i]),
            "bias": _num(cls["bias"][i]),
        }
    return {
        "n": int(table.sum()),
        "table": {"categories": [c.name for c in categories], "rows": "predicted",
                  "columns": "observed", "counts": table.tolist()},
        "accuracy": _num(sc.accuracy(table)),
        "heidke": _num(sc.heidke_skill_score(table)),
        "peirce": _num(sc.peirce_skill_score(table)),
        "gerrity": _num(sc.gerrity_score(collapsed) if kept.size >= 2 else float("nan")),
        "gerrity_categories": [categories[k].name for k in kept],
        "classes": per_class,
    }


def probabilistic_scores(prob: np.ndarray, observed: np.ndarray,
                         n_bins: int = RELIABILITY_BINS) -> dict[str, Any]:
    """Brier per class, RPS over :data:`ORDER` and reliability-diagram data.

    ``prob`` is ``(n, len(Code))`` indexed by code value; ``observed`` holds code values.
    """
    ordered = prob[:, [int(c) for c in ORDER]]
    obs_pos = _POS[observed.astype(np.int64)]
    bs = sc.brier_scores(ordered, obs_pos)
    bss = sc.brier_skill_scores(ordered, obs_pos)
    onehot = sc.one_hot(obs_pos, len(ORDER))
    brier = {}
    reliability = {}
    for k, code in enumerate(ORDER):
        seen = onehot[:, k].any() or (ordered[:, k] > 0).any()
        if not seen:
            continue
        brier[code.name] = {"brier": _num(bs[k]), "brier_skill": _num(bss[k]),
                            "observed_frequency": _num(onehot[:, k].mean())}
        reliability[code.name] = _reliability_dict(
            sc.reliability(ordered[:, k], onehot[:, k], n_bins))
    pooled = sc.reliability(ordered.ravel(), onehot.ravel(), n_bins)
    return {
        "brier": brier,
        "rps": _num(sc.ranked_probability_score(ordered, obs_pos)),
        "rps_skill": _num(sc.ranked_probability_skill_score(ordered, obs_pos)),
        "rps_order": [c.name for c in ORDER],
        "reliability": {"all": _reliability_dict(pooled), "classes": reliability},
    }


def _reliability_dict(r: dict) -> dict:
    bins = [{"lower": _num(lo, 3), "upper": _num(hi, 3), "count": int(n),
             "mean_forecast": _num(mf), "observed_frequency": _num(of)}
            for lo, hi, n, mf, of in zip(r["bin_lower"], r["bin_upper"], r["count"],
                                         r["mean_forecast"], r["observed_frequency"])]
    return {"bins": bins, "reliability_term": _num(r["reliability_term"]),
            "resolution_term": _num(r["resolution_term"]),
            "uncertainty": _num(r["uncertainty"]), "brier": _num(r["brier"])}


# --------------------------------------------------------------------------- running

def _batch_seed(seed, index: int):
    return None if seed is None else [int(seed), int(index)]


def diagnose_cases(profiles: Sequence[Profile], *, members: int, seed: int | None,
                   methods: Iterable[str] | str | None = None, calibration=None
                   ) -> tuple[dict[str, np.ndarray], np.ndarray | None]:
    """Consensus and method codes for every profile (with the other engine fields), and
    member probabilities (calibrated when a calibration is given; or None)."""
    from ptype.engine.columns import Columns
    from ptype.engine.run import run_columns
    columns = Columns.from_profiles(list(profiles))
    run = run_columns(columns, members, seed, methods,
                      batch_columns=max(1, MEMBER_BATCH_COLUMNS // max(members, 1)),
                      batch_seed=lambda k, start: _batch_seed(seed, k),
                      calibration=calibration)
    codes = {k: np.asarray(v) for k, v in run.fields.items()}
    return codes, run.probabilities


def run_verification(cases: Sequence[Case], *, members: int = 50,
                     seed: int | None = DEFAULT_SEED,
                     methods: Iterable[str] | str | None = None,
                     source: str | None = None, calibration=None,
                     held_out: bool = True) -> dict[str, Any]:
    """Verify the diagnoses of ``cases`` against their observations; the JSON-ready report.

    Cases whose observation cannot be verified are listed under ``excluded`` with the
    reason; profile errors raise :class:`ptype.errors.ProfileError` naming the entry.
    With ``calibration`` the probabilities are calibrated (the report says so); with
    ``held_out`` (and members) the report also scores, on the same cases, the raw member
    frequencies against calibrations fitted by cross-validation on the other cases
    (:mod:`ptype.verify.calibration`), so the effect of calibrating shows on cases it never
    saw.
    """
    from ptype.engine.calibration import UNCALIBRATED
    parsed = [parse_observation(c.observed) for c in cases]
    kept = [i for i, ob in enumerate(parsed) if not ob.excluded]
    reasons = Counter(parsed[i].reason for i in range(len(cases)) if parsed[i].excluded)
    excluded = {
        "count": len(cases) - len(kept),
        "reasons": dict(sorted(reasons.items(), key=lambda kv: (-kv[1], kv[0]))),
        "cases": [{"profile": cases[i].profile_ref, "where": cases[i].where,
                   "observed_raw": cases[i].observed, "reason": parsed[i].reason,
                   **({"detail": parsed[i].detail} if parsed[i].detail else {})}
                  for i in range(len(cases)) if parsed[i].excluded],
    }
    report: dict[str, Any] = {
        "ptype_version": __version__, "source": source, "n": len(kept),
        "n_cases": len(cases), "members": int(members), "seed": seed,
        "excluded": excluded, "order": [c.name for c in ORDER], "cases": [],
        "consensus": None, "methods": {}, "caution": CAUTION,
        "calibration": (calibration.summary() | {"calibrated": True}
                        if calibration is not None and members else UNCALIBRATED),
    }
    if not kept:
        return report
    profiles = [cases[i].load_profile() for i in kept]
    codes, prob = diagnose_cases(profiles, members=members, seed=seed, methods=methods,
                                 calibration=calibration)
    observed = np.array([int(parsed[i].code) for i in kept], dtype=np.int64)
    predicted = codes["ptype"].astype(np.int64)
    method_names = [k for k in METHOD_NAMES if k in codes]
    present = set(observed.tolist()) | set(predicted.tolist())
    for name in method_names:
        present |= {int(v) for v in codes[name] if int(v) != NO_RESULT}
    categories = [c for c in ORDER if int(c) in present]

    for row, i in enumerate(kept):
        case, profile = cases[i], profiles[row]
        site = case.site or (profile.site.name or profile.site.id if profile.site else None)
        vt = case.valid_time or profile.valid_time
        entry = {"profile": case.profile_ref, "site": site,
                 "valid_time": vt.isoformat().replace("+00:00", "Z") if vt else None,
                 "observed_raw": case.observed, "observed": parsed[i].code.name,
                 "predicted": Code(int(predicted[row])).name,
                 "control": Code(int(codes["control_ptype"][row])).name,
                 "correct": bool(predicted[row] == observed[row])}
        if prob is not None:
            entry["probabilities"] = {Code(k).name: round(float(p), 4)
                                      for k, p in enumerate(prob[row]) if p > 0}
        entry["methods"] = {name: (None if int(codes[name][row]) == NO_RESULT
                                   else Code(int(codes[name][row])).name)
                            for name in method_names}
        report["cases"].append(entry)

    consensus = categorical_scores(predicted, observed, categories)
    if prob is not None:
        consensus.update(probabilistic_scores(prob, observed))
        if held_out:
            report["held_out_calibration"] = _held_out(codes, prob, observed, seed)
    report["consensus"] = consensus
    for name in method_names:
        m = codes[name].astype(np.int64)
        ok = m != NO_RESULT
        block = categorical_scores(m[ok], observed[ok], categories)
        block["abstained"] = int((~ok).sum())
        report["methods"][name] = block
    return report


def ranked_score(prob: np.ndarray, observed: np.ndarray) -> float:
    """Ranked probability score of ``(n, len(Code))`` probabilities over :data:`ORDER`."""
    return float(sc.ranked_probability_score(prob[:, [int(c) for c in ORDER]],
                                             _POS[np.asarray(observed, dtype=np.int64)]))


def _held_out(codes: dict, prob: np.ndarray, observed: np.ndarray, seed) -> dict | None:
    """Raw against cross-validated calibrated probabilities on the same cases, or None when
    there are too few cases (or observed types) to fit."""
    from ptype.engine.calibration import features
    from ptype.verify import calibration as cv
    raw = codes.get("member_frequencies", prob)
    if len(observed) < cv.MIN_CASES * cv.FOLDS / (cv.FOLDS - 1) or len(set(observed)) < 2:
        return None
    try:
        import sklearn  # noqa: F401 - the calibration extra
    except ImportError:
        return {"skipped": "fitting calibrations needs pip install 'ptype[calibrate]'"}
    x = features(codes, raw)
    held = cv.cross_validated(x, observed, codes["possible"], seed=0 if seed is None else seed)
    return {"folds": cv.FOLDS, "n": len(observed),
            "raw": probabilistic_scores(raw, observed),
            "calibrated": probabilistic_scores(held, observed)}


# --------------------------------------------------------------------------- text table

def _fmt(x, width: int = 6, digits: int = 3) -> str:
    return f"{'-':>{width}}" if x is None else f"{x:>{width}.{digits}f}"


def render_table(report: dict) -> str:
    """Plain-text report for a terminal."""
    out = [f"ptype verification: {report['n']} verified cases of {report['n_cases']}"
           + (f" ({report['source']})" if report.get("source") else "")]
    ex = report["excluded"]
    if ex["count"]:
        out.append(f"excluded: {ex['count']} ("
                   + "; ".join(f"{r}: {n}" for r, n in ex["reasons"].items()) + ")")
    cons = report["consensus"]
    if cons is None:
        out.append("nothing to verify: every observation was excluded")
        out.append(CAUTION)
        return "\n".join(out) + "\n"
    cats = cons["table"]["categories"]
    out.append("")
    out.append("Consensus contingency table (rows predicted, columns observed)")
    w = max(6, max(len(c) for c in cats) + 1)
    out.append(" " * w + "".join(f"{c:>{w}}" for c in cats) + f"{'total':>{w}}")
    for c, row in zip(cats, cons["table"]["counts"]):
        out.append(f"{c:<{w}}" + "".join(f"{v:>{w}d}" for v in row) + f"{sum(row):>{w}d}")
    totals = np.sum(cons["table"]["counts"], axis=0)
    out.append(f"{'total':<{w}}" + "".join(f"{int(v):>{w}d}" for v in totals)
               + f"{int(totals.sum()):>{w}d}")
    out.append("")
    out.append(f"{'':<{w}}{'obs':>5}{'fcst':>6}{'POD':>7}{'FAR':>7}{'CSI':>7}{'bias':>7}")
    for c in cats:
        s = cons["classes"][c]
        out.append(f"{c:<{w}}{s['n_observed']:>5d}{s['n_forecast']:>6d} {_fmt(s['pod'])} "
                   f"{_fmt(s['far'])} {_fmt(s['csi'])} {_fmt(s['bias'])}")
    out.append("")
    out.append(f"{'':<16}{'n':>5}{'abst':>6}{'acc':>7}{'HSS':>7}{'PSS':>7}{'GS':>7}")
    rows = [("consensus", cons, 0)] + [(k, v, v["abstained"])
                                        for k, v in report["methods"].items()]
    for name, s, abst in rows:
        out.append(f"{name:<16}{s['n']:>5d}{abst:>6d} {_fmt(s['accuracy'])} "
                   f"{_fmt(s['heidke'])} {_fmt(s['peirce'])} {_fmt(s['gerrity'])}")
    if "rps" in cons:
        out.append("")
        out.append(f"Probabilities from {report['members']} members: RPS {_fmt(cons['rps'], 0)}"
                   f" (skill vs sample climatology {_fmt(cons['rps_skill'], 0)})")
        out.append(f"{'':<{w}}{'Brier':>7}{'BSS':>7}{'freq':>7}")
        for c, s in cons["brier"].items():
            out.append(f"{c:<{w}} {_fmt(s['brier'])} {_fmt(s['brier_skill'])} "
                       f"{_fmt(s['observed_frequency'])}")
        out.extend(_calibration_lines(report))
    out.append("")
    out.append(CAUTION)
    return "\n".join(out) + "\n"


def _calibration_lines(report: dict) -> list[str]:
    cal = report.get("calibration") or {}
    lines = [""]
    if cal.get("calibrated"):
        lines.append(f"Probabilities calibrated ({cal['n_cases']} cases from {cal['source']}, "
                     f"fitted {cal['fitted']}).")
    else:
        lines.append("Probabilities uncalibrated: member frequencies.")
    held = report.get("held_out_calibration")
    if held and "skipped" in held:
        lines.append(f"Held-out calibration not computed: {held['skipped']}.")
    elif held:
        lines.append(f"Held-out calibration ({held['folds']}-fold, {held['n']} cases): RPS "
                     f"{_fmt(held['raw']['rps'], 0)} raw -> "
                     f"{_fmt(held['calibrated']['rps'], 0)} calibrated (lower is better).")
    return lines


# --------------------------------------------------------------------------- figures + HTML

_INK = FIGURE["text"]
_ACCENT = FIGURE["series-1"]
_MUTED = FIGURE["muted"]
_CLASS_COLOURS = {code: style.colour for code, style in TYPE_STYLES.items()}


def _png(fig) -> bytes:
    """The figure as PNG, with the caution every figure carries under it."""
    fig.text(0.01, -0.02, CAUTION, fontsize=6, color=_MUTED, va="top")
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, bbox_inches="tight")
    return buf.getvalue()


def make_figures(report: dict) -> dict[str, bytes]:
    """PNG figures of a report: ``reliability`` (if probabilities) and ``skill``."""
    from matplotlib.figure import Figure
    figures: dict[str, bytes] = {}
    cons = report.get("consensus")
    if cons is None:
        return figures
    if "reliability" in cons:
        fig = Figure(figsize=(6.4, 6.4))
        ax, axn = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3, 1]})
        ax.plot([0, 1], [0, 1], color=_MUTED, lw=1, ls="--", label="perfect reliability")
        def curve(rel, min_count=1, **kw):
            pts = [(b["mean_forecast"], b["observed_frequency"]) for b in rel["bins"]
                   if b["count"] >= min_count]
            if pts:
                ax.plot(*zip(*pts), marker="o", **kw)
        # Classes with enough observations, bins with at least 5 cases: fewer, readable lines.
        for name, rel in cons["reliability"]["classes"].items():
            if (cons["brier"][name]["observed_frequency"] or 0) >= 0.05:
                curve(rel, min_count=5, color=_CLASS_COLOURS.get(name, _MUTED), lw=1.4, ms=4,
                      mec=_INK, mew=0.5, label=f"{name} (bins with 5+ cases)")
        pooled = cons["reliability"]["all"]
        curve(pooled, color=_INK, lw=2.2, ms=5, label="all classes pooled")
        n_classes = len(ORDER)
        ax.axhline(1.0 / n_classes, color=_MUTED, lw=0.8, ls=":",
                   label="pooled climatology (1/K)")
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1)
        ax.set_ylabel("observed relative frequency")
        ax.set_title("Reliability of the member probabilities (one class vs the rest)")
        ax.legend(fontsize=7, ncol=2, loc="upper left", frameon=False)
        ax.grid(alpha=0.3)
        lows = [b["lower"] for b in pooled["bins"]]
        counts = [b["count"] for b in pooled["bins"]]
        width = pooled["bins"][0]["upper"] - pooled["bins"][0]["lower"]
        axn.bar(lows, counts, width=width, align="edge", color=_ACCENT, alpha=0.7)
        axn.set_yscale("log")
        axn.set_ylabel("count")
        axn.set_xlabel("forecast probability")
        axn.grid(alpha=0.3)
        figures["reliability"] = _png(fig)
    held = report.get("held_out_calibration")
    if held and "skipped" not in held:
        figures["calibration"] = _calibration_figure(held)
    names = ["consensus"] + list(report["methods"])
    blocks = [cons] + [report["methods"][k] for k in report["methods"]]
    fig = Figure(figsize=(7.2, 3.6))
    ax = fig.subplots()
    keys = (("accuracy", "accuracy"), ("heidke", "Heidke"), ("peirce", "Peirce"),
            ("gerrity", "Gerrity"))
    x = np.arange(len(names))
    width = 0.2
    shades = (FIGURE["series-4"], FIGURE["series-1"], FIGURE["series-2"], FIGURE["series-3"])
    for k, ((key, label), colour) in enumerate(zip(keys, shades)):
        vals = [b[key] if b[key] is not None else np.nan for b in blocks]
        ax.bar(x + (k - 1.5) * width, vals, width, label=label, color=colour)
    ax.axhline(0, color=_INK, lw=0.8)
    ax.set_xticks(x, names, rotation=30, ha="right", fontsize=8)
    ax.set_ylabel("score")
    ax.set_title("Categorical scores, consensus and methods")
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0))
    ax.grid(axis="y", alpha=0.3)
    figures["skill"] = _png(fig)
    return figures


def _calibration_figure(held: dict) -> bytes:
    """Pooled reliability of the raw member frequencies and of the held-out calibrated
    probabilities on the same cases, with the caution."""
    from matplotlib.figure import Figure
    fig = Figure(figsize=(6.4, 5.2))
    ax = fig.subplots()
    ax.plot([0, 1], [0, 1], color=_MUTED, lw=1, ls="--", label="perfect reliability")
    for key, colour, label in (("raw", _MUTED, "member frequencies (raw)"),
                               ("calibrated", _INK, "calibrated, held out")):
        block = held[key]
        pts = [(b["mean_forecast"], b["observed_frequency"])
               for b in block["reliability"]["all"]["bins"] if b["count"] >= 5]
        if pts:
            ax.plot(*zip(*pts), marker="o", color=colour, lw=2,
                    label=f"{label}: RPS {block['rps']:.3f}")
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.set_xlabel("forecast probability")
    ax.set_ylabel("observed relative frequency")
    ax.set_title(f"Reliability before and after calibration ({held['folds']}-fold "
                 f"cross-validation, {held['n']} cases; bins of 5+)", fontsize=9)
    ax.legend(fontsize=8, frameon=False, loc="upper left")
    ax.grid(alpha=0.3)
    return _png(fig)


#: Folder of the page templates inside the package (shipped as package data).
TEMPLATE_FOLDER = "templates"
#: The verification report page (Jinja2, autoescaped).
REPORT_TEMPLATE = "report.html"


def _cell(x: Any) -> str:
    """A table cell: an en dash for a missing value, three decimals for a float."""
    from markupsafe import Markup
    if x is None:
        return Markup("&ndash;")
    return f"{x:.3f}" if isinstance(x, float) else str(x)


@functools.cache
def _environment():
    """The Jinja2 environment of the report pages, with autoescape on for every template."""
    import jinja2
    env = jinja2.Environment(loader=jinja2.PackageLoader("ptype.verify", TEMPLATE_FOLDER),
                             autoescape=True, trim_blocks=True, lstrip_blocks=True,
                             undefined=jinja2.StrictUndefined)
    env.filters["cell"] = _cell
    return env


def figure_sources(figures: dict[str, bytes],
                   image_files: dict[str, str] | None = None) -> dict[str, str]:
    """``src`` of every figure: the file name from ``image_files`` when given, else the PNG
    bytes as a ``data:`` URI (RFC 2397) so the page stands alone."""
    sources = {name: "data:image/png;base64," + base64.b64encode(png).decode("ascii")
               for name, png in figures.items()}
    sources.update(image_files or {})
    return sources


def html_context(report: dict, figures: dict[str, bytes],
                 image_files: dict[str, str] | None = None) -> dict[str, Any]:
    """What the report template reads: the report itself plus the rows and totals it lays out
    (computed here so the template only places values)."""
    cons = report["consensus"]
    context: dict[str, Any] = {
        "report": report, "excluded": report["excluded"], "cons": cons, "caution": CAUTION,
        "images": figure_sources(figures, image_files),
        "labels": {c.name: LABELS[c] for c in Code},
        "palette_css": palette_css(),
    }
    if cons is None:
        return context
    counts = cons["table"]["counts"]
    context.update(
        categories=cons["table"]["categories"],
        contingency_rows=list(zip(cons["table"]["categories"], counts)),
        column_totals=[int(v) for v in np.sum(counts, axis=0)],
        score_rows=[("consensus", cons, 0)] + [(k, v, v["abstained"])
                                               for k, v in report["methods"].items()],
        brier=cons.get("brier"))
    return context


def render_html(report: dict, figures: dict[str, bytes] | None = None,
                image_files: dict[str, str] | None = None) -> str:
    """Self-contained HTML: tables, figures embedded as PNG data URIs (or linked to
    ``image_files`` names when given), and the caution.

    Rendered from ``templates/report.html`` with autoescape, so text from a manifest
    (profile names, raw observations, reasons) can never become markup.
    """
    figures = make_figures(report) if figures is None else figures
    template = _environment().get_template(REPORT_TEMPLATE)
    return template.render(html_context(report, figures, image_files))
