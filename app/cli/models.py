"""`lowgmap models`: every registered boundary model, enough to write the ``[[models]]`` of a case file.

For each model of :data:`lowgmap.physics.models.boundary.BOUNDARY_MODELS`: its family (the module it
comes from), the regimes on each side of its line (and the regimes of its family's scheme), the
section family it is a default for, its constants (default, unit, allowed range, source, meaning),
the range of the data behind its source, its assumptions and its citation. Everything is read from
the model objects themselves, so the list cannot drift from what a chart uses.
"""
from __future__ import annotations

import math

from lowgmap.app.cli.common import CliError, clean, emit

__all__ = ["add_arguments", "run", "model_entry", "models_report", "format_models"]


def add_arguments(parser) -> None:
    parser.add_argument("name", nargs="?", metavar="NAME",
                        help="a model name (e.g. bubble_slug_dukler_1988) or a family (tube, corner); default: all")


def run(args) -> int:
    from lowgmap.physics.surrogates import surrogate_errors

    entries = models_report(args.name)
    errors = surrogate_errors()
    text = format_models(entries)
    if any(e["family"] in ("corner", "open_channel") for e in entries):
        text += "\n\n" + format_surrogate_errors(errors)
    emit(args, clean({"models": entries, "surrogate_errors": errors}), text)
    return 0


def format_surrogate_errors(rows: list[dict]) -> str:
    """The surrogate tables' measured errors against the full solves, as text (``--exact`` uses the solves)."""
    out = ["Surrogate tables (used unless --exact): largest relative error against the full solve, measured at "
           "random points between the table nodes"]
    for r in rows:
        err = "not measured" if r["max_rel_error"] is None else f"{r['max_rel_error']:.2g}"
        out.append(f"  {r['quantity']}: {err} over {r['points']} points (limit {r['limit']:.2g}); {r['box']}")
    return "\n".join(out)


def _family(model) -> tuple[str, str]:
    """(family name, one-line description) from the module that defines the model."""
    import sys

    mod = type(model).__module__
    family = mod.rsplit(".", 1)[-1] if mod.startswith("lowgmap.physics.models.") else mod
    doc = (getattr(sys.modules.get(mod), "__doc__", "") or "").strip().splitlines()
    return family, (doc[0].strip() if doc else "")


def _scheme(model) -> dict:
    scheme = getattr(model, "scheme", None)
    if scheme is None or not hasattr(scheme, "regimes"):
        return {"name": "sequence rule", "kind": "chain",
                "description": "the region-defining lines chained by regime names in order of increasing gas "
                               "fraction; a point's regime is the one below the first line it lies below",
                "regimes": [], "members": []}
    return {"name": scheme.name, "kind": getattr(scheme, "kind", ""),
            "description": getattr(scheme, "description", ""),
            "regimes": [{"name": r.name, "separates_gas": bool(r.separates_gas), "description": r.description}
                        for r in scheme.regimes],
            "members": list(getattr(scheme, "members", ()))}


def _num(x):
    return None if x is None or not math.isfinite(float(x)) else float(x)


def model_entry(model) -> dict:
    """JSON-ready description of one boundary model (SI values; ``None`` for an open end of a range)."""
    from lowgmap.physics.chart.composition import DEFAULT_MODELS
    from lowgmap.physics.properties.groups import GROUPS

    family, family_doc = _family(model)
    constants = [{"name": c.name, "default": c.default, "unit": c.unit, "low": _num(c.low), "high": _num(c.high),
                  "source": c.source, "meaning": c.doc} for c in model.constants]
    validity = [{"group": v.group, "symbol": GROUPS[v.group].symbol, "description": GROUPS[v.group].description,
                 "low": _num(v.low), "high": _num(v.high), "range": v.describe(), "source": v.source}
                for v in getattr(model, "validity", ())]
    return {
        "name": model.name, "label": model.label, "family": family, "family_description": family_doc,
        "regime_below": model.regime_below, "regime_above": model.regime_above,
        "scheme": _scheme(model),
        "default_for": [k for k, names in DEFAULT_MODELS.items() if model.name in names],
        "default_when": _default_when([k for k, names in DEFAULT_MODELS.items() if model.name in names]),
        "assumes_negligible_gravity": bool(getattr(model, "low_gravity", False)),
        "constants": constants, "validity": validity,
        "validity_note": str(getattr(model, "validity_note", "") or ""),
        "notes": str(getattr(model, "notes", "") or ""), "citation": model.citation,
        "case_file": _case_snippet(model),
    }


#: When each default set is drawn, in words (keys of :data:`lowgmap.physics.chart.composition.DEFAULT_MODELS`).
_DEFAULT_SETS = {
    "closed": "closed sections (tubes and ducts)",
    "open": "open sections (corners, grooves, wedge channels)",
    "vertical upward": "closed circular tubes when the case gives an orientation: conduit.orientation = "
                       "\"vertical upward flow\"",
    "horizontal": "closed circular tubes when the case gives an orientation: conduit.orientation = \"horizontal\" "
                  "or an angle within 10 deg of it",
}


def _default_when(keys) -> str:
    """The default sets a model belongs to, in words (empty when none)."""
    if not keys:
        return ""
    text = "in the default set for " + " and for ".join(_DEFAULT_SETS.get(k, f"{k} sections") for k in keys)
    if any(k in ("vertical upward", "horizontal") for k in keys):
        text += ("; a buoyancy model: it is not drawn without an orientation, and with one the hand-over rule "
                 "(Eötvös number >= 1) decides whether it defines the regions or is a comparison line")
    return text


def _value(v: float) -> str:
    """A constant for a case file, exactly (the shortest text that reads back as the same float)."""
    return repr(float(v)) if math.isfinite(v) else ("inf" if v > 0 else "-inf")


def _case_snippet(model) -> str:
    """The model's entry in a case file, with every constant at its default (written exactly)."""
    lines = ["[[models]]", f'name = "{model.name}"']
    if model.constants:
        lines.append("constants = { " + ", ".join(f"{c.name} = {_value(float(c.default))}" for c in model.constants)
                     + " }")
    return "\n".join(lines)


def models_report(name: str | None = None) -> list[dict]:
    """Entries (:func:`model_entry`) of every registered model, of one model, or of one family."""
    from lowgmap.physics.models.boundary import get_model, model_names

    names = model_names()
    if name is None:
        return [model_entry(get_model(n)) for n in names]
    if name in names:
        return [model_entry(get_model(name))]
    family = [e for e in (model_entry(get_model(n)) for n in names) if e["family"] == name]
    if family:
        return family
    fams = sorted({model_entry(get_model(n))["family"] for n in names})
    raise CliError(f"unknown boundary model or family {name!r}; families: {', '.join(fams)}; models: "
                   f"{', '.join(names)}")


def _range(low, high, unit) -> str:
    lo = "-inf" if low is None else f"{low:.6g}"
    hi = "inf" if high is None else f"{high:.6g}"
    return f"{lo} to {hi}" + ("" if unit in ("-", "") else f" {unit}")


def format_models(entries: list[dict]) -> str:
    """The models as text for a person (one block per model)."""
    out = []
    if len(entries) > 1:
        out.append(f"{len(entries)} boundary models. Each line separates two regimes in the (Q_L, Q_G) plane; "
                   f"\"below\" is the side of smaller gas flow.")
        out.append("")
    for e in entries:
        out.append(f"{e['name']}  —  {e['label']}")
        out.append(f"  family:    {e['family']}" + (f" ({e['family_description']})" if e["family_description"] else ""))
        out.append(f"  regimes:   below the line: {e['regime_below']}; above the line: {e['regime_above']}")
        sch = e["scheme"]
        if sch["regimes"]:
            out.append(f"  scheme:    {sch['name']}: {sch['description']}")
            out.append("             regimes: " + "; ".join(r["name"] + (" (separates the gas)" if r["separates_gas"]
                                                                          else "") for r in sch["regimes"]))
        else:
            out.append(f"  scheme:    {sch['name']}")
        out.append("  default:   " + (e["default_when"] or "not in a default set: list it under [[models]] to use it"))
        if e["assumes_negligible_gravity"]:
            out.append("  gravity:   assumes gravity negligible (the chart reports the Eötvös-number check"
                       + ("; when the case gives vertical upward or horizontal flow in a circular tube, the buoyancy "
                          "models take over from Eötvös number 1)" if "closed" in e["default_for"] else ")"))
        if e["constants"]:
            out.append("  constants (default, allowed range, meaning; source of the default):")
            for c in e["constants"]:
                unit = "" if c["unit"] in ("-", "") else f" {c['unit']}"
                allowed = _range(c["low"], c["high"], c["unit"])
                out.append(f"    {c['name']} = {c['default']:.6g}{unit}, allowed {allowed}: {c['meaning']}")
                out.append(f"        source: {c['source']}")
        else:
            out.append("  constants: none")
        if e["validity"] or e["validity_note"]:
            out.append("  validity of the source data:")
            for v in e["validity"]:
                out.append(f"    {v['range']} ({v['description']}); {v['source']}")
            if e["validity_note"]:
                out.append(f"    {e['validity_note']}")
        if e["notes"]:
            out.append(f"  assumptions: {e['notes']}")
        out.append(f"  source:    {e['citation']}")
        out.append("  case file:")
        out += ["    " + ln for ln in e["case_file"].splitlines()]
        out.append("")
    out.append("Constants not given in a case file keep their defaults. See the README (\"Case file\") for how a "
               "[[models]] list and the default set of the section combine.")
    return "\n".join(out)
