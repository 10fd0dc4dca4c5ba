"""`lowgmap compare` (test points against the chart) and `lowgmap calibrate` (fit constants, empirical lines).

All numbers come from :mod:`lowgmap.physics.studies.agreement` and :mod:`lowgmap.physics.studies.calibration` on the chart built by
:meth:`lowgmap.physics.chart.composition.Chart.build`, as in the dashboard's test-point panel. Writing a calibrated case
keeps the previous revision: the constants in force before, and the date, go to a ``[[history]]``
entry, and the revision letter moves on (A -> B).
"""
from __future__ import annotations

import argparse
import datetime as _dt
import os
import re
from pathlib import Path

from lowgmap.app import CAUTION
from lowgmap.app.cli import CliError, _clean, _emit

__all__ = ["register", "cmd_compare", "cmd_calibrate", "load_points", "parse_regime_map", "criteria_from_args",
           "next_revision", "calibrated_document", "document_with_boundary", "compare_report"]


# ============================================================================================= helpers

def parse_regime_map(items) -> dict:
    """``["file label=chart regime", ...]`` -> dict (the first '=' splits).

    >>> parse_regime_map(["annular=annular (gas core)", "bubbly = dispersed bubbles"])
    {'annular': 'annular (gas core)', 'bubbly': 'dispersed bubbles'}
    """
    out = {}
    for item in items or ():
        if "=" not in item:
            raise CliError(f"--map takes LABEL=REGIME (file label = chart regime name), got {item!r}")
        k, v = item.split("=", 1)
        if not k.strip() or not v.strip():
            raise CliError(f"--map takes LABEL=REGIME with both parts, got {item!r}")
        out[k.strip()] = v.strip()
    return out


def load_points(path, doc):
    """Read a test-point file; standard gas units use the case's pressure and temperature."""
    from lowgmap.app.files.testpoints import read_test_points

    p = Path(path)
    if not p.is_file():
        raise CliError(f"test-point file not found: {str(p)!r}")
    f = doc.case.fluid
    return read_test_points(p, pressure=f.pressure, temperature=f.temperature)


def criteria_from_args(args):
    """:class:`lowgmap.physics.studies.agreement.ValidityCriteria` from the command-line options."""
    from lowgmap.physics.studies.agreement import ValidityCriteria

    from lowgmap.app.files.units import to_si

    length = None
    if getattr(args, "length", None):
        length = to_si(args.length, "length", "--length")
    kw = {"observation_length": length}
    for opt in ("bond_max", "safety_factor", "capillary_multiple"):
        v = getattr(args, opt, None)
        if v is not None:
            kw[opt] = v
    try:
        return ValidityCriteria(**kw)
    except ValueError as exc:
        raise CliError(str(exc)) from None


def next_revision(rev: str) -> str:
    """The revision after ``rev``: letters count on (A -> B, Z -> AA), a trailing number increments.

    Other revision texts get "-2" appended.

    >>> [next_revision(r) for r in ("A", "B", "Z", "AZ", "b", "3", "B2", "draft", "")]
    ['B', 'C', 'AA', 'BA', 'c', '4', 'B3', 'draft-2', 'B']
    """
    rev = (rev or "").strip()
    if not rev:
        return "B"
    m = re.match(r"^(.*?)(\d+)$", rev)
    if m:
        return f"{m.group(1)}{int(m.group(2)) + 1}"
    if re.fullmatch(r"[A-Z]{1,3}", rev) or re.fullmatch(r"[a-z]{1,3}", rev):
        base = "A" if rev.isupper() else "a"
        digits = [ord(c) - ord(base) for c in rev]
        i = len(digits) - 1
        while i >= 0 and digits[i] == 25:
            digits[i] = 0
            i -= 1
        if i < 0:
            digits.insert(0, 0)
        else:
            digits[i] += 1
        return "".join(chr(ord(base) + d) for d in digits)
    return f"{rev}-2"


def _sig(v: float) -> float:
    return float(f"{v:.6g}")


def _copy(data):
    import tomlkit

    return tomlkit.parse(tomlkit.dumps(data))


def _chart_models(chart):
    return list(chart.region_models) + list(chart.comparison_models)


def _ensure_models(data, chart):
    """The document's [[models]] array; when the case used the defaults, the chart's models are written out."""
    import tomlkit

    models = data.get("models")
    if models is None or len(models) == 0:
        aot = tomlkit.aot()
        for m, _ in _chart_models(chart):
            t = tomlkit.table()
            t["name"] = m.name
            aot.append(t)
        if "models" in data:
            del data["models"]
        data.add(tomlkit.nl())
        data["models"] = aot
        models = data["models"]
    return models


def _history_entry(data, chart, change: str, date, custom_names):
    """Append the previous revision (its model constants, custom lines, date) to [[history]]."""
    import tomlkit

    entry = tomlkit.table()
    entry["revision"] = str(data.get("revision", "A"))
    entry["date"] = date
    entry["change"] = change
    arr = tomlkit.array()
    arr.multiline(True)
    for m, consts in _chart_models(chart):
        it = tomlkit.inline_table()
        it["name"] = m.name
        c = tomlkit.inline_table()
        for k, v in consts:
            c[k] = _sig(float(v))
        if len(c):
            it["constants"] = c
        arr.append(it)
    entry["models"] = arr
    if custom_names:
        entry["custom_boundaries"] = list(custom_names)
    entry.add(tomlkit.nl())
    hist = data.get("history")
    if hist is None:
        data.add(tomlkit.nl())
        data["history"] = tomlkit.aot()
        hist = data["history"]
    hist.append(entry)


def _custom_names(data) -> list[str]:
    return [str(b.get("name", "")) for b in (data.get("custom_boundaries") or [])]


def _new_revision(data, chart, change: str, date=None, custom_names=()) -> str:
    old = str(data.get("revision", "A"))
    new = next_revision(old)
    _history_entry(data, chart, change, date or _dt.date.today(), custom_names)
    data["revision"] = new
    return new


def _relocate_test_points(data, old_path, new_path):
    """Keep [test_points] files pointing at the same files when the case is written elsewhere."""
    tp = data.get("test_points")
    if not tp or old_path is None or "files" not in tp:
        return
    old_dir = Path(old_path).resolve().parent
    new_dir = Path(new_path).resolve().parent
    if old_dir == new_dir:
        return
    files = tp["files"]
    for i, f in enumerate(list(files)):
        p = Path(str(f))
        if p.is_absolute():
            continue
        target = (old_dir / p).resolve()
        try:
            files[i] = os.path.relpath(target, new_dir)
        except ValueError:                       # another drive (Windows)
            files[i] = str(target)


def calibrated_document(doc, cal, *, points_name: str = "", date=None):
    """A copy of the case document with the fitted constants, the next revision and a [[history]] entry.

    Parameters
    ----------
    doc : CaseDocument     the case as loaded
    cal : lowgmap.physics.studies.calibration.Calibration
    points_name : str      test-point file name, for the record
    date : datetime.date, optional   date written in the history entry (default today)

    Returns
    -------
    (tomlkit document, new revision)
    """
    import tomlkit

    data = _copy(doc.data)
    before = _custom_names(data)
    fitted = ", ".join(f"{c.key} {c.start:.4g} -> {c.value:.4g}" for c in cal.constants)
    new = next_revision(str(data.get("revision", "A")))
    change = (f"revision {new}: constants fitted to {cal.n_points} test points"
              + (f" ({points_name})" if points_name else "") + f": {fitted}")
    models = _ensure_models(data, cal.chart_before)
    by_model = cal.params()
    for name, values in by_model.items():
        entry = next((e for e in models if e.get("name") == name), None)
        if entry is None:                        # a default model on the chart not listed in the file
            entry = tomlkit.table()
            entry["name"] = name
            models.append(entry)
            entry = models[-1]
        consts = entry.get("constants")
        if consts is None:
            entry["constants"] = tomlkit.inline_table()
            consts = entry["constants"]
        for k, v in values.items():
            consts[k] = _sig(v)
        ints = "; ".join(f"{c.name} 95 % [{c.interval[0]:.4g}, {c.interval[1]:.4g}]" for c in cal.constants
                         if c.model == name)
        consts.comment(f"fitted in revision {new} to {cal.n_points} test points ({cal.interval_method}: {ints})")
    _new_revision(data, cal.chart_before, change, date, before)
    return data, new


def document_with_boundary(doc, fit, chart, *, points_name: str = "", date=None):
    """A copy of the case document with an empirical boundary added ([[custom_boundaries]] + [[models]]).

    The line is listed first among the models, so that under the sequence rule it defines the regions
    and a model for the same pair of regimes becomes a comparison line.

    Returns
    -------
    (tomlkit document, new revision, name of the boundary)
    """
    import tomlkit

    from lowgmap.app.files.units import convert, to_si

    data = _copy(doc.data)
    before = _custom_names(data)
    spec = fit.spec()
    existing = {str(b.get("name")) for b in (data.get("custom_boundaries") or [])} | \
        {m.name for m, _ in _chart_models(chart)}
    name, k = spec["name"], 2
    while name in existing:
        name = f"{spec['name']}_{k}"
        k += 1
    spec["name"] = name
    new = next_revision(str(data.get("revision", "A")))
    change = (f"revision {new}: empirical boundary {name} ({fit.regime_below} | {fit.regime_above}) fitted to "
              f"{fit.n_below + fit.n_above} test points" + (f" ({points_name})" if points_name else "")
              + f": Q_G = {fit.a:.4g} Q_L^{fit.b:.4g} (SI)")
    models = _ensure_models(data, chart)
    entry = tomlkit.table()
    entry["name"] = name
    entry.add(tomlkit.nl())
    models.insert(0, entry)
    # written in the case's liquid-flow unit: Q_G = a' Q_L^b with both flows in that unit,
    # a' = a_SI / c^(1 - b) where c is the SI value of one unit (the case-file reader converts back)
    unit = getattr(getattr(doc, "settings", None), "liquid_flow_unit", None) or "m^3/s"
    c = to_si(f"1 {unit}", "flow", "flow unit")
    t = tomlkit.table()
    for key in ("name", "kind", "a", "b", "flow_unit", "ql_range", "regime_below", "regime_above", "label",
                "citation"):
        if key == "a":
            v = _sig(spec["a"] / c ** (1.0 - spec["b"]))
        elif key == "b":
            v = _sig(spec["b"])
        elif key == "flow_unit":
            v = unit
        elif key == "ql_range":
            v = [f"{convert(q, 'flow', unit):.6g} {unit}" for q in spec["ql_range"]]
        else:
            v = spec[key]
        t[key] = v
    t["a"].comment(f"Q_G = a * Q_L^b with both flows in {unit}; fitted from test points")
    cb = data.get("custom_boundaries")
    if cb is None:
        data.add(tomlkit.nl())
        data["custom_boundaries"] = tomlkit.aot()
        cb = data["custom_boundaries"]
    cb.append(t)
    _new_revision(data, chart, change, date, before)
    return data, new, name


def _write(data, args, doc) -> Path:
    from lowgmap.app.files.casefile import loads_case, save_case

    out = Path(args.output)
    if out.exists() and not args.force:
        raise CliError(f"{out} exists; choose another -o path or add --force to replace it")
    _relocate_test_points(data, doc.path, out)
    import tomlkit

    loads_case(tomlkit.dumps(data), source=str(out), base_dir=out.resolve().parent)   # must load before writing
    save_case(data, out)
    return out


def _pct(x) -> str:
    return "n/a" if x is None else f"{100.0 * x:.0f} %"


# ============================================================================================= compare

def compare_report(doc, tps, res, points_path: str = "") -> dict:
    """JSON-ready report of :func:`lowgmap.physics.studies.agreement.agreement` with the file and case identification."""
    d = res.to_dict()
    d.update({"case": str(doc.path) if doc.path else "", "title": doc.case.title, "revision": doc.case.revision,
              "points_file": str(points_path), "rows_set_aside": tps.rejected_rows,
              "read_problems": [str(p) for p in tps.problems]})
    return _clean(d)


def _format_compare(doc, tps, res, points_path) -> str:
    st = doc.settings
    ul, ug = st.liquid_flow_unit, st.gas_flow_unit
    from lowgmap.app.files.units import convert

    c = res.criteria
    lines = [f"{doc.case.title} (revision {doc.case.revision}): {res.n_points} test point(s) from "
             f"{Path(points_path).name}" + (f"; {len(tps.rejected_rows)} row(s) set aside" if tps.rejected_rows
                                            else "")]
    lines.append(f"Validity: {res.n_valid} of {res.n_points} valid. Checks: Bond number < {c.bond_max:g} on "
                 f"L = {res.length_scale * 1e3:.4g} mm (Brauner 1990); low-g time >= {c.safety_factor:g} x required "
                 f"time (capillary settling x {c.capillary_multiple:g} + transit over {res.observation_length:.4g} m; "
                 f"factors: common practice, no source)")
    head = (f"  {'test id':<10} {'Q_L [' + ul + ']':>13} {'Q_G [' + ug + ']':>13} {'Bo':>9} {'needs [s]':>10} "
            f"{'has [s]':>9}  valid  observed -> chart")
    lines.append(head)
    for p in res.points:
        mark = "" if p.agrees is None else ("  ok" if p.agrees else "  DIFFERS")
        obs = p.observed or "(none)"
        lines.append(f"  {p.test_id:<10} {convert(p.ql, 'flow', ul):13.4g} {convert(p.qg, 'flow', ug):13.4g} "
                     f"{p.bond:9.3g} {c.safety_factor * p.t_required:10.3g} {p.duration:9.3g}  "
                     f"{'yes' if p.valid else 'no ':<5}  {obs} -> {p.predicted}{mark}")
    invalid = [p for p in res.points if not p.valid]
    if invalid:
        lines.append("Why points are not valid:")
        for p in invalid:
            for r in p.reasons:
                lines.append(f"  {p.test_id}: {r}")
    lines.append(f"Agreement with the chart: {_pct(res.fraction_valid)} of {res.confusion_valid.compared} valid "
                 f"point(s); {_pct(res.fraction_all)} of {res.confusion_all.compared} point(s) in all")
    lines.append("Confusion matrix, valid points (rows observed, columns chart):")
    lines += ["  " + ln for ln in res.confusion_valid.format().splitlines()]
    lines.append("Confusion matrix, all points:")
    lines += ["  " + ln for ln in res.confusion_all.format().splitlines()]
    if res.unknown_labels:
        lines.append("Observed labels that are not chart regimes (map them with --map \"LABEL=REGIME\"): "
                     + ", ".join(f"{k!r} ({n})" for k, n in res.unknown_labels)
                     + f". Chart regimes: {'; '.join(res.regimes)}")
    if res.by_boundary:
        lines.append("Disagreeing points by boundary (log distance to the line in decades):")
        for b in res.by_boundary:
            lines.append(f"  {b.label}:")
            for q in b.points:
                how = "" if q.crossing_explains else " (crossing this line alone does not give the observed regime)"
                lines.append(f"    {q.test_id:<10} observed {q.observed}, chart {q.predicted}; "
                             f"{q.log_distance:.3g} decade{'' if q.valid else '; point not valid'}{how}")
    lines += ["", CAUTION]
    return "\n".join(lines)


def cmd_compare(args) -> int:
    from lowgmap.physics.studies.agreement import agreement
    from lowgmap.physics.chart.composition import Chart

    from lowgmap.app.files.casefile import load_case

    doc = load_case(args.case)
    tps = load_points(args.points, doc)
    chart = Chart.build(doc.case)
    res = agreement(chart, tps, regime_map=parse_regime_map(args.map), criteria=criteria_from_args(args))
    _emit(args, compare_report(doc, tps, res, args.points), _format_compare(doc, tps, res, args.points))
    return 0


# ============================================================================================= calibrate

def _format_calibration(doc, cal, points_path, written) -> str:
    lines = [f"Calibration of {doc.case.title} (revision {doc.case.revision}) against {cal.n_points} test point(s) "
             f"from {Path(points_path).name}"]
    for c in cal.constants:
        lines.append(f"  {c.key}: {c.start:.4g} -> {c.value:.4g}, 95 % interval [{c.interval[0]:.4g}, "
                     f"{c.interval[1]:.4g}] ({cal.interval_method}); allowed [{c.low:.4g}, {c.high:.4g}]")
    lines.append(f"  transition sharpness {cal.sharpness:.3g} per log unit; share of points counted as mislabelled "
                 f"{100 * cal.label_error:.2g} %")
    lines.append(f"  agreement on the fitted points: {_pct(cal.agreement_before)} before -> "
                 f"{_pct(cal.agreement_after)} after; cross-validated ({cal.cv_method}): {_pct(cal.cv_agreement)}")
    if cal.check_before is not None:
        lines.append(f"  all points with a chart regime: {_pct(cal.check_before.fraction_all)} -> "
                     f"{_pct(cal.check_after.fraction_all)}; valid points: {_pct(cal.check_before.fraction_valid)} "
                     f"-> {_pct(cal.check_after.fraction_valid)}")
    for w in cal.warnings:
        lines.append(f"  note: {w}")
    if written:
        lines.append(f"Wrote {written[0]} (revision {written[1]}; revision {doc.case.revision} kept in [[history]])")
    else:
        lines.append("Not written (give -o NEW_CASE to write the calibrated case).")
    lines += ["", CAUTION]
    return "\n".join(lines)


def _format_empirical(doc, fit, points_path, written) -> str:
    lines = [f"Empirical boundary for {doc.case.title} (revision {doc.case.revision}) from {Path(points_path).name}: "
             f"{fit.regime_below} (below) | {fit.regime_above} (above)",
             f"  Q_G = a Q_L^b (SI, m^3/s): a = {fit.a:.4g} (95 % [{fit.a_interval[0]:.4g}, {fit.a_interval[1]:.4g}]), "
             f"b = {fit.b:.4g} (95 % [{fit.b_interval[0]:.4g}, {fit.b_interval[1]:.4g}]) ({fit.interval_method})",
             f"  points: {fit.n_below} below, {fit.n_above} above; on their observed side: {_pct(fit.agreement)}; "
             f"cross-validated ({fit.cv_method}): {_pct(fit.cv_agreement)}",
             f"  liquid flow range of the points: {fit.ql_range[0]:.4g} to {fit.ql_range[1]:.4g} m^3/s"]
    for w in fit.warnings:
        lines.append(f"  note: {w}")
    if written:
        lines.append(f"Wrote {written[0]} (revision {written[1]}, boundary {written[2]}; revision "
                     f"{doc.case.revision} kept in [[history]])")
    else:
        lines.append("Not written (give -o NEW_CASE to add the boundary to the case).")
    lines += ["", CAUTION]
    return "\n".join(lines)


def cmd_calibrate(args) -> int:
    from lowgmap.physics.studies.calibration import calibrate, fit_empirical_boundary
    from lowgmap.physics.chart.composition import Chart

    from lowgmap.app.files.casefile import load_case

    if bool(args.fit) == bool(args.empirical):
        raise CliError("give either --fit MODEL[.CONSTANT] ... or --empirical \"BELOW|ABOVE\"")
    doc = load_case(args.case)
    tps = load_points(args.points, doc)
    chart = Chart.build(doc.case)
    kw = dict(regime_map=parse_regime_map(args.map), criteria=criteria_from_args(args),
              use="all" if args.all_points else "valid", label_error=args.label_error, starts=args.starts,
              folds=args.folds, seed=args.seed)
    name = Path(args.points).name
    if args.fit:
        cal = calibrate(chart, tps, args.fit, **kw)
        written = None
        if args.output:
            data, rev = calibrated_document(doc, cal, points_name=name)
            written = (_write(data, args, doc), rev)
        out = cal.to_dict()
        out.update({"case": args.case, "points_file": args.points, "revision_before": doc.case.revision,
                    "written": str(written[0]) if written else None, "revision_after": written[1] if written else None})
        _emit(args, _clean(out), _format_calibration(doc, cal, args.points, written))
        return 0
    fit = fit_empirical_boundary(chart, tps, args.empirical, name=args.name, source=name, **kw)
    written = None
    if args.output:
        data, rev, bname = document_with_boundary(doc, fit, chart, points_name=name)
        written = (_write(data, args, doc), rev, bname)
    out = fit.to_dict()
    out.update({"case": args.case, "points_file": args.points, "revision_before": doc.case.revision,
                "written": str(written[0]) if written else None, "revision_after": written[1] if written else None,
                "boundary_name": written[2] if written else fit.name})
    _emit(args, _clean(out), _format_empirical(doc, fit, args.points, written))
    return 0


# ============================================================================================= registration

def _folds(text: str):
    if text.strip().lower() in ("loo", "leave-one-out"):
        return "loo"
    try:
        k = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a whole number >= 2 or 'loo', got {text!r}") from None
    if k < 2:
        raise argparse.ArgumentTypeError(f"must be >= 2 (or 'loo'), got {k}")
    return k


def _common(sp):
    sp.add_argument("points", metavar="POINTS", help="test-point file (.csv or .xlsx, see `Test points` in the README)")
    sp.add_argument("--map", action="append", metavar="LABEL=REGIME",
                    help="rename an observed label to a chart regime (repeatable), e.g. \"annular=annular (gas core)\"")
    sp.add_argument("--length", metavar="LENGTH",
                    help="distance from the inlet to where the regime was observed, e.g. \"0.3 m\" (default: the "
                         "conduit length)")
    sp.add_argument("--safety-factor", type=float, metavar="S",
                    help="available low-g time must be >= S x required time (default 2, common practice)")
    sp.add_argument("--bond-max", type=float, metavar="BO", help="largest Bond number for a valid point (default 1)")
    sp.add_argument("--capillary-multiple", type=float, metavar="K",
                    help="capillary time scales the interface needs to settle (default 1)")


def register(sub, add):
    sp = add("compare", cmd_compare, "test points against the chart: validity per point (Bond number, low-g time), "
             "confusion matrix, agreement, disagreeing points")
    _common(sp)
    sp = add("calibrate", cmd_calibrate, "fit boundary-model constants to test points (--fit), or fit an empirical "
             "power-law boundary between two observed regimes (--empirical); -o writes the next case revision")
    _common(sp)
    sp.add_argument("--fit", nargs="+", action="extend", metavar="NAME[.CONSTANT]",
                    help="model constants to fit, e.g. bubble_slug_dukler_1988.alpha_c (a model name alone: all "
                         "its constants)")
    sp.add_argument("--empirical", metavar="BELOW|ABOVE",
                    help="fit Q_G = a Q_L^b between two observed regimes, the one at smaller gas flow first")
    sp.add_argument("--name", metavar="NAME", help="name of the empirical boundary (snake_case)")
    sp.add_argument("-o", "--output", metavar="NEW_CASE", help="write the calibrated case (next revision) here")
    sp.add_argument("--force", action="store_true", help="replace NEW_CASE if it exists")
    sp.add_argument("--all-points", action="store_true",
                    help="fit every point with a chart regime, not only the valid ones")
    sp.add_argument("--label-error", type=float, metavar="EPS",
                    help="fix the share of mislabelled points (default: fitted within [1e-4, 0.3])")
    sp.add_argument("--starts", type=int, default=4, metavar="N", help="random starts of the fit (default 4)")
    sp.add_argument("--folds", type=_folds, default=5, metavar="K",
                    help="cross-validation folds, or 'loo' (default 5)")
    sp.add_argument("--seed", type=int, default=0, metavar="S", help="seed of the random starts and folds")

