"""Case revisions: a calibrated case or a case with a fitted boundary, written as its next revision.

Changing a case's boundary-model constants (a calibration against test points) or adding an
empirical boundary keeps the previous revision on record: the constants in force before, the custom
boundaries and the date go to a ``[[history]]`` entry, and the revision letter moves on (A -> B).
When the new revision moves the operating point into another regime or changes its margin verdict
(:func:`lowgmap.physics.chart.margins.margin_verdict`), the entry's ``change`` text says so and the
entry carries ``verdict_before`` and ``verdict_after``.
The functions here return a changed *copy* of the case document (tomlkit, comments kept); the caller
checks it (:func:`lowgmap.app.files.casefile.loads_case`) and writes it
(:func:`lowgmap.app.files.casefile.save_case`). Used by ``lowgmap calibrate`` and the dashboard.
"""
from __future__ import annotations

import datetime as _dt
import os
import re
from pathlib import Path

__all__ = ["next_revision", "calibrated_document", "document_with_boundary", "relocate_test_points",
           "operating_verdict", "verdict_words", "verdict_change"]


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


def _history_entry(data, chart, change: str, date, custom_names, verdicts=("", "")):
    """Append the previous revision (its model constants, custom lines, date) to [[history]]."""
    import tomlkit

    entry = tomlkit.table()
    entry["revision"] = str(data.get("revision", "A"))
    entry["date"] = date
    entry["change"] = change
    if verdicts[0] or verdicts[1]:
        entry["verdict_before"] = verdicts[0]
        entry["verdict_after"] = verdicts[1]
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


def _new_revision(data, chart, change: str, date=None, custom_names=(), verdicts=("", "")) -> str:
    old = str(data.get("revision", "A"))
    new = next_revision(old)
    _history_entry(data, chart, change, date or _dt.date.today(), custom_names, verdicts)
    data["revision"] = new
    return new


def operating_verdict(doc, chart):
    """The verdict at the case's operating point on ``chart`` (None without an operating point or regimes).

    Uses the case's required margin and intended regime (an intended regime the chart does not have is
    left out), through :func:`lowgmap.physics.chart.margins.margin_verdict` as every output does.
    """
    from lowgmap.physics.chart.margins import margin_verdict, point_margins

    op = getattr(doc.case, "operating_point", None)
    if op is None or not chart.regime_names:
        return None
    settings = getattr(doc, "settings", None)
    intended = doc.case.intended_regime or getattr(settings, "intended_regime", None) or None
    if intended not in chart.regime_names:
        intended = None
    required = getattr(settings, "required_margin", 0.0) or 0.0
    return margin_verdict(point_margins(chart, op.ql, op.qg), required, intended)


def verdict_words(v) -> str:
    """A verdict in one line of words: regime, intended-regime status, margin against the requirement."""
    from lowgmap.app.formatting import format_percent

    if v is None:
        return "no verdict (no operating point or no regimes)"
    parts = [v.regime or "regime not determined"]
    if v.intended_regime is not None:
        parts.append(v.regime_status)
    parts.append(f"margin ±{format_percent(v.margin)}, required ±{format_percent(v.required)} {v.margin_status}")
    return "; ".join(parts)


def verdict_change(before, after, rev_before: str, rev_after: str) -> str:
    """One sentence when the regime or the verdict at the operating point changes between revisions, else "".

    >>> from types import SimpleNamespace as V
    >>> a = V(regime="bubbles", regime_status="in the intended regime", margin_status="met", intended_regime="bubbles",
    ...       margin=0.4, required=0.3)
    >>> b = V(regime="slugs", regime_status="NOT IN THE INTENDED REGIME", margin_status="NOT MET",
    ...       intended_regime="bubbles", margin=-0.1, required=0.3)
    >>> verdict_change(a, b, "A", "B")  # doctest: +NORMALIZE_WHITESPACE
    'The operating point moves from bubbles in revision A to slugs in revision B: NOT IN THE INTENDED REGIME,
     required margin ±30 % NOT MET in revision B (was: in the intended regime, met).'
    >>> verdict_change(a, a, "A", "B")
    ''
    """
    if before is None or after is None:
        return ""
    same_regime = before.regime == after.regime
    if same_regime and (before.margin_status, before.regime_status) == (after.margin_status, after.regime_status):
        return ""
    from lowgmap.app.formatting import format_percent

    req = format_percent(after.required)
    now = ([after.regime_status] if after.intended_regime is not None else []) + \
        [f"required margin ±{req} {after.margin_status}"]
    was = ([before.regime_status] if before.intended_regime is not None else []) + [before.margin_status]
    if same_regime:
        head = (f"The operating point stays in {after.regime or 'an undetermined regime'} but its verdict changes "
                f"(margin ±{format_percent(before.margin)} -> ±{format_percent(after.margin)})")
    else:
        head = (f"The operating point moves from {before.regime or 'an undetermined regime'} in revision "
                f"{rev_before} to {after.regime or 'an undetermined regime'} in revision {rev_after}")
    return f"{head}: {', '.join(now)} in revision {rev_after} (was: {', '.join(was)})."


def _record_verdicts(doc, chart_before, chart_after, rev_before, rev_after):
    """(change sentence, verdict_before words, verdict_after words) for the history entry."""
    if chart_before is None or chart_after is None:
        return "", "", ""
    try:
        vb, va = operating_verdict(doc, chart_before), operating_verdict(doc, chart_after)
    except ValueError:
        return "", "", ""
    if vb is None or va is None:
        return "", "", ""
    return verdict_change(vb, va, rev_before, rev_after), verdict_words(vb), verdict_words(va)


def relocate_test_points(data, old_path, new_path) -> None:
    """Keep the [test_points] files of ``data`` pointing at the same files when the case moves folder."""
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


def _write_bands(entry, bands) -> None:
    """Write calibrated bands into a [[models]] entry: ``bands = { c = [low, high] }`` (exact floats, so the
    revision reads back the same interval) and ``band_reasons = { c = "..." }``; a constant's band
    already in the entry is replaced."""
    import tomlkit

    if not bands:
        return
    for key in ("bands", "band_reasons"):
        if entry.get(key) is None:
            entry[key] = tomlkit.inline_table()
    for _model, const, low, high, reason in bands:
        entry["bands"][const] = [float(low), float(high)]
        entry["band_reasons"][const] = str(reason)


def calibrated_document(doc, cal, *, points_name: str = "", date=None):
    """A copy of the case document with the fitted constants, their calibrated bands (the 95 % intervals,
    :meth:`~lowgmap.physics.studies.calibration.Calibration.band_entries`, written as the model's ``bands``
    and ``band_reasons``), the next revision and a [[history]] entry.

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
        _write_bands(entry, [b for b in cal.band_entries() if b[0] == name])
    note, vb, va = _record_verdicts(doc, cal.chart_before, cal.chart_after, str(doc.case.revision), new)
    if note:
        change += ". " + note
    _new_revision(data, cal.chart_before, change, date, before, (vb, va))
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
    note, vb, va = _record_verdicts(doc, chart, chart_of_document(data, doc), str(doc.case.revision), new)
    if note:
        change += ". " + note
    _new_revision(data, chart, change, date, before, (vb, va))
    return data, new, name


def chart_of_document(data, doc):
    """The chart of a changed case document (None when it does not load)."""
    from lowgmap.physics.chart.composition import Chart

    from lowgmap.app.files.casefile import dumps_case, loads_case

    base = Path(doc.path).resolve().parent if getattr(doc, "path", None) else None
    try:
        return Chart.build(loads_case(dumps_case(data), base_dir=base).case)
    except (ValueError, OSError):
        return None
