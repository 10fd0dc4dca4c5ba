"""Liquid and gas properties at the case temperature and pressure.

A :class:`FluidPair` holds the five properties every model needs (liquid density, liquid viscosity,
surface tension, gas density, gas viscosity), in SI units, with a record of where each came from.
:func:`make_fluid_pair` builds one from names, from three liquid sources:

* ``"coolprop"``: pure and pseudo-pure substances with a reference equation of state in CoolProp
  (water, nitrogen, oxygen, hydrogen, ammonia, refrigerants, ...), as saturated liquid at ``T`` or as
  liquid at ``(p, T)``. Water surface tension follows IAPWS R1-76(2014)
  (:func:`water_surface_tension_iapws`); other surface tensions are CoolProp's correlations.
* ``"table"``: the bundled table ``physics/data/test_liquids.csv`` of engineering test liquids that
  have no equation of state (silicone oils, a perfluorinated liquid, a hydrofluoroether,
  isopropanol, 50 wt% glycerol/water), with linear/Andrade temperature laws inside a stated range.
* ``"user"``: all properties given by the user.

The gas is the liquid's own saturated vapour, a named CoolProp gas at ``(p, T)`` (real-gas equation
of state), or an ideal gas ``rho = p M / (R T)``. Single properties can be overridden; every
override is written into the source strings.
"""
from __future__ import annotations

import collections
import csv
import difflib
import functools
import math
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping

import numpy as np

from lowgmap.physics import cache
from lowgmap.physics.validate import finite, positive

__all__ = [
    "FluidPair",
    "make_fluid_pair",
    "fluid_names",
    "table_liquid_info",
    "water_surface_tension_iapws",
    "MOLAR_GAS_CONSTANT",
    "STANDARD_ATMOSPHERE",
    "TABLE_PATH",
]

#: Molar gas constant R [J/(mol K)] (exact in the 2019 SI; CODATA 2018).
MOLAR_GAS_CONSTANT = 8.314462618
#: Standard atmosphere [Pa] (exact by definition); the pressure used when none is given and the gas
#: is not the liquid's own vapour.
STANDARD_ATMOSPHERE = 101325.0
#: Path of the bundled table of test liquids.
TABLE_PATH = Path(__file__).resolve().parent.parent / "data" / "test_liquids.csv"

_T0C = 273.15  # 0 degC in K
_PROPERTY_NAMES = ("rho_l", "mu_l", "sigma", "rho_g", "mu_g")
_UNITS = {"rho_l": "kg/m^3", "mu_l": "Pa s", "sigma": "N/m", "rho_g": "kg/m^3", "mu_g": "Pa s"}
_LIQUID_SOURCES = ("auto", "coolprop", "table", "user")
_GAS_MODELS = ("auto", "vapour", "real", "ideal")

# IAPWS R1-76(2014) constants for the surface tension of ordinary water.
_IAPWS_TC = 647.096  # critical temperature [K]
_IAPWS_B = 235.8e-3  # [N/m]
_IAPWS_b = -0.625
_IAPWS_MU = 1.256
_IAPWS_TMIN = 273.16  # triple point [K]


# --------------------------------------------------------------------------------------------------
# Result object
# --------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class FluidPair:
    """Liquid/gas properties at one temperature and pressure, SI units.

    Parameters
    ----------
    liquid : str            liquid name (CoolProp name, table name or the user's label)
    gas : str               gas name
    temperature : float     temperature T [K]
    pressure : float        pressure p [Pa] (the saturation pressure for a saturated liquid)
    rho_l : float           liquid density [kg/m^3]
    mu_l : float            liquid dynamic viscosity [Pa s]
    sigma : float           surface tension of the liquid against the gas [N/m]
    rho_g : float           gas density [kg/m^3], must be below ``rho_l``
    mu_g : float            gas dynamic viscosity [Pa s]
    liquid_source : str     where the liquid properties come from (model, correlation, overrides)
    gas_source : str        where the gas properties come from
    notes : tuple of str    assumptions made while building the pair

    Examples
    --------
    >>> fp = FluidPair("oil", "air", 293.15, 101325.0, 900.0, 0.01, 0.02, 1.2, 1.8e-5, "user", "user")
    >>> round(fp.delta_rho, 6)
    898.8
    """

    liquid: str
    gas: str
    temperature: float
    pressure: float
    rho_l: float
    mu_l: float
    sigma: float
    rho_g: float
    mu_g: float
    liquid_source: str
    gas_source: str
    notes: tuple[str, ...] = ()

    def __post_init__(self):
        for name in ("liquid", "gas", "liquid_source", "gas_source"):
            value = getattr(self, name)
            if not isinstance(value, str) or not value.strip():
                raise TypeError(f"{name} must be a non-empty string, got {value!r}")
        object.__setattr__(self, "temperature", positive("temperature", self.temperature, "K"))
        object.__setattr__(self, "pressure", positive("pressure", self.pressure, "Pa"))
        for name in _PROPERTY_NAMES:
            object.__setattr__(self, name, positive(name, getattr(self, name), _UNITS[name]))
        if self.rho_g >= self.rho_l:
            raise ValueError(
                f"rho_g must be < rho_l ({self.rho_l:.6g} kg/m^3), got {self.rho_g:.6g} kg/m^3: "
                "the gas would be denser than the liquid")
        notes = self.notes
        if isinstance(notes, str) or not all(isinstance(n, str) for n in notes):
            raise TypeError(f"notes must be a tuple of strings, got {notes!r}")
        object.__setattr__(self, "notes", tuple(notes))

    @property
    def nu_l(self) -> float:
        """Liquid kinematic viscosity mu_l/rho_l [m^2/s]."""
        return self.mu_l / self.rho_l

    @property
    def nu_g(self) -> float:
        """Gas kinematic viscosity mu_g/rho_g [m^2/s]."""
        return self.mu_g / self.rho_g

    @property
    def delta_rho(self) -> float:
        """Density difference rho_l - rho_g [kg/m^3] (> 0)."""
        return self.rho_l - self.rho_g

    def describe(self) -> dict:
        """Plain, JSON-ready summary with SI units in the keys (for the command line and reports)."""
        return {
            "liquid": self.liquid,
            "gas": self.gas,
            "temperature_K": self.temperature,
            "temperature_degC": self.temperature - _T0C,
            "pressure_Pa": self.pressure,
            "rho_l_kg_m3": self.rho_l,
            "mu_l_Pa_s": self.mu_l,
            "nu_l_m2_s": self.nu_l,
            "sigma_N_m": self.sigma,
            "rho_g_kg_m3": self.rho_g,
            "mu_g_Pa_s": self.mu_g,
            "nu_g_m2_s": self.nu_g,
            "liquid_source": self.liquid_source,
            "gas_source": self.gas_source,
            "notes": list(self.notes),
        }


# --------------------------------------------------------------------------------------------------
# Water surface tension (IAPWS)
# --------------------------------------------------------------------------------------------------
def water_surface_tension_iapws(temperature):
    r"""Surface tension of ordinary water against its vapour, IAPWS R1-76(2014).

    .. math:: \sigma = B\,\tau^{\mu}\,(1 + b\,\tau), \qquad \tau = 1 - T/T_c

    with :math:`B` = 235.8 mN/m, :math:`b` = -0.625, :math:`\mu` = 1.256, :math:`T_c` = 647.096 K.

    Parameters
    ----------
    temperature : float or array   T [K], within [273.16, 647.096] K

    Returns
    -------
    float or array
        Surface tension sigma [N/m]. For an array, points outside the range give NaN.

    Notes
    -----
    Valid from the triple point (273.16 K) to the critical point (647.096 K), where sigma = 0; the
    release states its uncertainty, which grows towards the critical point. The value is for the
    water/vapour interface and is used against air unchanged. Clean water is assumed: surfactant
    contamination lowers sigma in practice. A scalar outside the range raises ``ValueError``.

    References
    ----------
    IAPWS R1-76(2014), Revised Release on Surface Tension of Ordinary Water Substance, International
    Association for the Properties of Water and Steam, 2014. Background: N. B. Vargaftik, B. N. Volkov,
    L. D. Voljak, J. Phys. Chem. Ref. Data 12(3):817-820, 1983. doi:10.1063/1.555688

    Examples
    --------
    >>> round(water_surface_tension_iapws(293.15) * 1e3, 2)
    72.74
    >>> water_surface_tension_iapws([200.0, 373.15]).round(5)
    array([    nan, 0.05891])
    """
    if np.ndim(temperature) == 0:
        T = finite("temperature", temperature, "K")
        if not (_IAPWS_TMIN <= T <= _IAPWS_TC):
            raise ValueError(
                f"temperature must be within {_range_text(_IAPWS_TMIN, _IAPWS_TC)} for the IAPWS "
                f"R1-76(2014) water surface tension, got {_kc(T)}")
        tau = 1.0 - T / _IAPWS_TC
        return float(_IAPWS_B * tau ** _IAPWS_MU * (1.0 + _IAPWS_b * tau))
    T = np.asarray(temperature, dtype=float)
    ok = (T >= _IAPWS_TMIN) & (T <= _IAPWS_TC)
    tau = np.where(ok, 1.0 - T / _IAPWS_TC, np.nan)
    return _IAPWS_B * tau ** _IAPWS_MU * (1.0 + _IAPWS_b * tau)


# --------------------------------------------------------------------------------------------------
# Formatting helpers
# --------------------------------------------------------------------------------------------------
def _kc(T: float) -> str:
    """'293.15 K (20 degC)'."""
    return f"{T:.6g} K ({T - _T0C:.6g} degC)"


def _range_text(lo: float, hi: float, hi_open: bool = False) -> str:
    rb = ")" if hi_open else "]"
    return f"[{lo:.6g}, {hi:.6g}{rb} K ([{lo - _T0C:.6g}, {hi - _T0C:.6g}{rb} degC)"


def _norm(name: str) -> str:
    """Key used for case-insensitive look-up: lower case without blanks, '-' and '_'."""
    return "".join(c for c in name.strip().lower() if c not in " -_\t")


def _fmt(x: float) -> str:
    return f"{x:.6g}"


# --------------------------------------------------------------------------------------------------
# The table of test liquids
# --------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _TableLiquid:
    name: str
    aliases: tuple[str, ...]
    T_ref: float
    T_min: float
    T_max: float
    rho: float
    drho_dT: float
    nu_or_mu: str
    visc_ref: float
    visc_B: float
    sigma: float
    dsigma_dT: float
    source: str

    def properties(self, T: float) -> tuple[float, float, float]:
        """(rho [kg/m^3], mu [Pa s], sigma [N/m]) at T [K]; T must be in [T_min, T_max]."""
        if not (self.T_min <= T <= self.T_max):
            raise ValueError(
                f"temperature must be within {_range_text(self.T_min, self.T_max)} for table liquid "
                f"'{self.name}' (the range of its data; no extrapolation), got {_kc(T)}")
        rho = self.rho + self.drho_dT * (T - self.T_ref)
        visc = self.visc_ref * math.exp(self.visc_B * (1.0 / T - 1.0 / self.T_ref))
        mu = visc * rho if self.nu_or_mu == "nu" else visc
        sigma = self.sigma + self.dsigma_dT * (T - self.T_ref)
        return rho, mu, sigma


_TABLE_COLUMNS = ("name", "aliases", "T_ref_K", "T_min_K", "T_max_K", "rho_kg_m3", "drho_dT_kg_m3_K",
                  "nu_or_mu", "visc_ref", "visc_B_K", "sigma_N_m", "dsigma_dT_N_m_K", "source")


@functools.lru_cache(maxsize=1)
def _table() -> dict[str, _TableLiquid]:
    """Read and check the bundled table; key: table name."""
    with open(TABLE_PATH, newline="", encoding="utf-8") as fh:
        lines = [ln for ln in fh if ln.strip() and not ln.lstrip().startswith("#")]
    reader = csv.DictReader(lines)
    if tuple(reader.fieldnames or ()) != _TABLE_COLUMNS:
        raise ValueError(f"{TABLE_PATH.name}: columns must be {_TABLE_COLUMNS}, got {reader.fieldnames}")
    out: dict[str, _TableLiquid] = {}
    for i, row in enumerate(reader, start=1):
        where = f"{TABLE_PATH.name} row {i} ({row.get('name')!r})"
        try:
            num = {k: float(row[k]) for k in _TABLE_COLUMNS
                   if k not in ("name", "aliases", "nu_or_mu", "source")}
        except (TypeError, ValueError) as exc:
            raise ValueError(f"{where}: {exc}") from None
        liq = _TableLiquid(
            name=row["name"].strip(),
            aliases=tuple(a.strip() for a in row["aliases"].split(";") if a.strip()),
            T_ref=num["T_ref_K"], T_min=num["T_min_K"], T_max=num["T_max_K"],
            rho=num["rho_kg_m3"], drho_dT=num["drho_dT_kg_m3_K"], nu_or_mu=row["nu_or_mu"].strip(),
            visc_ref=num["visc_ref"], visc_B=num["visc_B_K"], sigma=num["sigma_N_m"],
            dsigma_dT=num["dsigma_dT_N_m_K"], source=row["source"].strip(),
        )
        if not liq.name or not liq.source:
            raise ValueError(f"{where}: name and source must not be empty")
        if liq.nu_or_mu not in ("nu", "mu"):
            raise ValueError(f"{where}: nu_or_mu must be 'nu' or 'mu', got {liq.nu_or_mu!r}")
        if not (0 < liq.T_min <= liq.T_ref <= liq.T_max):
            raise ValueError(f"{where}: need 0 < T_min_K <= T_ref_K <= T_max_K")
        for T in (liq.T_min, liq.T_max):
            if min(liq.properties(T)) <= 0:
                raise ValueError(f"{where}: a property is not positive at {T} K")
        if liq.name in out:
            raise ValueError(f"{where}: duplicate name")
        out[liq.name] = liq
    return out


@functools.lru_cache(maxsize=1)
def _table_lookup() -> dict[str, str]:
    """Normalised name or alias -> table name."""
    out: dict[str, str] = {}
    for liq in _table().values():
        for key in (liq.name, *liq.aliases):
            k = _norm(key)
            if k in out and out[k] != liq.name:
                raise ValueError(f"{TABLE_PATH.name}: alias {key!r} used by two rows")
            out[k] = liq.name
    return out


# --------------------------------------------------------------------------------------------------
# CoolProp names
# --------------------------------------------------------------------------------------------------
#: Friendly names that CoolProp does not know or that we map differently (normalised key -> CoolProp).
#: 'hydrogen' means parahydrogen: liquid hydrogen in tanks is converted to (near-)equilibrium para form
#: (99.8 % para at 20 K); normal hydrogen (75 % ortho) is 'normal-hydrogen'.
_FRIENDLY = {
    "hydrogen": "ParaHydrogen", "h2": "ParaHydrogen", "lh2": "ParaHydrogen",
    "liquidhydrogen": "ParaHydrogen", "normalhydrogen": "Hydrogen",
    "lox": "Oxygen", "liquidoxygen": "Oxygen",
    "ln2": "Nitrogen", "liquidnitrogen": "Nitrogen",
    "lhe": "Helium", "liquidhelium": "Helium",
    "lar": "Argon", "liquidargon": "Argon",
    "lch4": "Methane", "liquidmethane": "Methane",
    "steam": "Water",
}
_HYDROGEN_NOTE = ("'hydrogen' is taken as parahydrogen (CoolProp ParaHydrogen), the form of stored liquid "
                  "hydrogen; use 'normal-hydrogen' for the 3:1 ortho/para room-temperature mixture")


@functools.lru_cache(maxsize=1)
def _cp():
    """CoolProp, imported on first use (its import takes seconds; the table and FluidPair do not need it)."""
    import CoolProp.CoolProp as CP

    return CP


def _cp_version() -> str:
    import CoolProp

    return f"CoolProp {CoolProp.__version__}"


@functools.lru_cache(maxsize=1)
def _coolprop_names() -> tuple[str, ...]:
    CP = _cp()
    return tuple(sorted(CP.get_global_param_string("FluidsList").split(","), key=str.lower))


@functools.lru_cache(maxsize=1)
def _coolprop_lookup() -> dict[str, str]:
    """Normalised name/alias -> CoolProp fluid name. Ambiguous aliases are dropped."""
    CP = _cp()
    seen: dict[str, set[str]] = {}
    for name in _coolprop_names():
        keys = [name] + CP.get_fluid_param_string(name, "aliases").split(",")
        if name.startswith("n-"):
            keys.append(name[2:])
        for key in keys:
            k = _norm(key)
            if len(k) >= 2 and not k.isdigit():
                seen.setdefault(k, set()).add(name)
    out = {k: next(iter(v)) for k, v in seen.items() if len(v) == 1}
    for name in _coolprop_names():  # a fluid's own name always wins
        out[_norm(name)] = name
    out.update(_FRIENDLY)
    # Names of the bundled table win over CoolProp aliases (e.g. 'perfluorohexane' is the table's isomer
    # mixture; CoolProp's pure n-isomer stays reachable as 'n-perfluorohexane' or 'C6F14').
    for key in _table_lookup():
        if key in out and key != _norm(out[key]):
            del out[key]
    return out


@functools.lru_cache(maxsize=None)
def _cp_info(name: str) -> dict:
    CP = _cp()

    def prop(key):
        try:
            return CP.PropsSI(key, name)
        except ValueError:
            return float("nan")

    def bib(key):
        try:
            return CP.get_fluid_param_string(name, "BibTeX-" + key) or ""
        except ValueError:
            return ""

    Tt, Tmin = prop("Ttriple"), prop("Tmin")
    return {
        "T_low": max(x for x in (Tt, Tmin) if math.isfinite(x)),
        "Tcrit": prop("Tcrit"), "Tmax": prop("Tmax"), "pmax": prop("pmax"), "M": prop("M"),
        "pure": CP.get_fluid_param_string(name, "pure") == "true",
        "eos": bib("EOS"), "visc": bib("VISCOSITY"), "sigma": bib("SURFACE_TENSION"),
    }


_PHASE_TEXT = {
    "iphase_liquid": "liquid", "iphase_supercritical_liquid": "compressed liquid above the critical pressure",
    "iphase_gas": "gas", "iphase_supercritical_gas": "gas above the critical temperature",
    "iphase_supercritical": "supercritical fluid", "iphase_twophase": "a two-phase (saturated) mixture",
    "iphase_critical_point": "the critical point",
}
_LIQUID_PHASES = ("iphase_liquid", "iphase_supercritical_liquid")
_GAS_PHASES = ("iphase_gas", "iphase_supercritical_gas", "iphase_supercritical")


def _phase(st) -> str:
    """CoolProp phase of a state as its constant's name, e.g. 'iphase_liquid'."""
    CP = _cp()
    ph = st.phase()
    for key in _PHASE_TEXT:
        if ph == getattr(CP, key):
            return key
    return "unknown"


def _state(name: str, inputs: str, a: float, b: float, what: str):
    CP = _cp()
    st = CP.AbstractState("HEOS", name)
    inputs = getattr(CP, inputs)
    try:
        st.update(inputs, a, b)
    except ValueError as exc:
        raise ValueError(f"CoolProp cannot evaluate {what}: {exc}") from None
    return st


def _try(fn):
    try:
        v = float(fn())
    except ValueError:
        return None
    return v if math.isfinite(v) and v > 0 else None


# --------------------------------------------------------------------------------------------------
# Public name listings
# --------------------------------------------------------------------------------------------------
def fluid_names() -> dict[str, list[str]]:
    """Names accepted by :func:`make_fluid_pair`, by source.

    Returns
    -------
    dict
        ``"coolprop"``: CoolProp fluid names (their aliases and friendly names such as ``water``,
        ``carbon dioxide``, ``hydrogen`` are accepted too, case-insensitively);
        ``"table"``: names of the bundled test liquids in file order (see :func:`table_liquid_info`).

    Examples
    --------
    >>> names = fluid_names()
    >>> "Water" in names["coolprop"], "silicone-oil-5cst" in names["table"]
    (True, True)
    """
    return {"coolprop": list(_coolprop_names()), "table": list(_table())}


def table_liquid_info(name: str) -> dict:
    """Source, valid temperature range and reference values of one bundled test liquid.

    Parameters
    ----------
    name : str   table name or alias (case-insensitive)

    Returns
    -------
    dict   name, aliases, source, T_min_K, T_max_K, T_min_degC, T_max_degC, T_ref_K and the
           properties at T_ref_K (rho_kg_m3, mu_Pa_s, sigma_N_m), plus the temperature laws' coefficients.

    Examples
    --------
    >>> info = table_liquid_info("Silicone oil 5 cSt")
    >>> info["name"], info["T_min_K"], info["T_max_K"]
    ('silicone-oil-5cst', 263.15, 373.15)
    """
    key = _norm(name) if isinstance(name, str) else ""
    if key not in _table_lookup():
        raise ValueError(_unknown_message(name, "table liquid", table=True, coolprop=False))
    liq = _table()[_table_lookup()[key]]
    rho, mu, sigma = liq.properties(liq.T_ref)
    return {
        "name": liq.name, "aliases": list(liq.aliases), "source": liq.source,
        "T_min_K": liq.T_min, "T_max_K": liq.T_max,
        "T_min_degC": round(liq.T_min - _T0C, 9), "T_max_degC": round(liq.T_max - _T0C, 9),
        "T_ref_K": liq.T_ref, "rho_kg_m3": rho, "mu_Pa_s": mu, "sigma_N_m": sigma,
        "drho_dT_kg_m3_K": liq.drho_dT, "nu_or_mu": liq.nu_or_mu, "visc_ref": liq.visc_ref,
        "visc_B_K": liq.visc_B, "dsigma_dT_N_m_K": liq.dsigma_dT,
    }


def _unknown_message(name, what: str, *, table: bool = True, coolprop: bool = True) -> str:
    pool: dict[str, str] = {}
    if coolprop:
        pool.update({k: v for k, v in _coolprop_lookup().items()})
    if table:
        pool.update(_table_lookup())
    key = _norm(name) if isinstance(name, str) else ""
    close = difflib.get_close_matches(key, list(pool), n=8, cutoff=0.6)
    shown = list(dict.fromkeys(pool[c] for c in close))[:5]
    hint = f"close matches: {', '.join(shown)}" if shown else "no close match"
    return f"unknown {what} {name!r} ({hint}); fluid_names() lists the accepted names"


# --------------------------------------------------------------------------------------------------
# Liquid sources
# --------------------------------------------------------------------------------------------------
def _resolve_liquid(name: str, source: str):
    """Return ('coolprop', cp_name) | ('table', table_name) | ('user', label)."""
    key = _norm(name)
    if source == "user":
        return "user", name.strip()
    if source in ("auto", "table") and key in _table_lookup():
        return "table", _table_lookup()[key]
    if source in ("auto", "coolprop") and key in _coolprop_lookup():
        return "coolprop", _coolprop_lookup()[key]
    if source == "table":
        msg = _unknown_message(name, "table liquid", coolprop=False)
        if key in _coolprop_lookup():
            msg += f" ({name!r} is a CoolProp fluid: use liquid_source='coolprop' or 'auto')"
        raise ValueError(msg)
    if source == "coolprop":
        msg = _unknown_message(name, "CoolProp fluid", table=False)
        if key in _table_lookup():
            msg += f" ({name!r} is a table liquid: use liquid_source='table' or 'auto')"
        raise ValueError(msg)
    raise ValueError(_unknown_message(name, "liquid")
                     + ", or give liquid_source='user' with rho_l, mu_l and sigma in overrides")


def _coolprop_liquid(cp: str, T: float, p: float | None, need: set[str], p_assumed: bool = False):
    """Liquid properties from CoolProp. Returns (props, p_used, source_text, notes)."""
    info = _cp_info(cp)
    lo, Tc = info["T_low"], info["Tcrit"]
    if not (lo <= T < Tc):
        raise ValueError(
            f"temperature must be within {_range_text(lo, Tc, hi_open=True)} for liquid '{cp}' "
            f"(CoolProp: triple point to critical point), got {_kc(T)}")
    notes: list[str] = []
    sat = _state(cp, "QT_INPUTS", 0.0, T, f"saturated liquid '{cp}' at temperature {_kc(T)}")
    p_sat = sat.p()
    if p is None:
        st, p_used, state_text = sat, p_sat, "saturated liquid at T"
    else:
        pmax = info["pmax"]
        if math.isfinite(pmax) and p > pmax:
            raise ValueError(f"pressure must be <= {_fmt(pmax)} Pa for CoolProp '{cp}', got {_fmt(p)} Pa")
        st = _state(cp, "PT_INPUTS", p, T, f"'{cp}' at temperature {_kc(T)} and pressure {_fmt(p)} Pa")
        phase = _phase(st)
        if phase not in _LIQUID_PHASES:
            raise ValueError(
                f"'{cp}' is not a liquid at temperature {_kc(T)} and pressure {_fmt(p)} Pa: CoolProp finds "
                f"{_PHASE_TEXT.get(phase, 'an unknown phase')} (saturation pressure at this temperature "
                f"{_fmt(p_sat)} Pa); "
                + ("the pressure was not given and 101325 Pa was assumed because the gas is not the liquid's "
                   "own vapour: give a pressure above the saturation pressure" if p_assumed else
                   "give a pressure above it, or pressure=None for the saturated liquid"))
        p_used, state_text = p, "liquid at (p, T)"
    props: dict[str, float] = {}
    parts = [f"{_cp_version()} '{cp}', {state_text}; density: EOS {info['eos'] or 'of CoolProp'}"]
    if "rho_l" in need:
        props["rho_l"] = st.rhomass()
    if "mu_l" in need:
        mu = _try(st.viscosity)
        if mu is None:
            raise ValueError(f"mu_l: CoolProp has no liquid viscosity for '{cp}' here; "
                             "give it in overrides={'mu_l': ...} [Pa s]")
        props["mu_l"] = mu
        parts.append(f"viscosity: {info['visc'] or 'CoolProp model'}")
    if "sigma" in need:
        if cp == "Water":
            props["sigma"] = water_surface_tension_iapws(T)
            parts.append("surface tension: IAPWS R1-76(2014) at T")
        else:
            s = _try(sat.surface_tension)
            if s is None:
                raise ValueError(f"sigma: CoolProp has no surface tension for '{cp}'; "
                                 "give it in overrides={'sigma': ...} [N/m]")
            props["sigma"] = s
            parts.append(f"surface tension: {info['sigma'] or 'CoolProp correlation'} at T")
        if p is not None:
            notes.append("surface tension is the saturation value at T (pressure effect neglected)")
    return props, p_used, "; ".join(parts), notes


# --------------------------------------------------------------------------------------------------
# Gas sources
# --------------------------------------------------------------------------------------------------
def _resolve_gas(name: str) -> str:
    key = _norm(name)
    if key in _coolprop_lookup():
        return _coolprop_lookup()[key]
    if key in _table_lookup():
        raise ValueError(f"gas {name!r} is a table liquid and has no gas data; name a CoolProp gas "
                         "(e.g. 'air', 'nitrogen', 'helium') or give rho_g and mu_g in overrides")
    raise ValueError(_unknown_message(name, "gas", table=False))


def _coolprop_gas(cp: str, T: float, p: float, model: str, saturated: bool, need: set[str]):
    """Gas properties. ``saturated``: the fluid's saturated vapour at T (p is then p_sat)."""
    info = _cp_info(cp)
    notes: list[str] = []
    if saturated:
        st = _state(cp, "QT_INPUTS", 1.0, T, f"saturated vapour '{cp}' at temperature {_kc(T)}")
        where = f"saturated vapour at T (p_sat = {_fmt(st.p())} Pa)"
    else:
        lo, hi = info["T_low"], info["Tmax"]
        if not (lo <= T <= hi):
            raise ValueError(f"temperature must be within {_range_text(lo, hi)} for gas '{cp}' (CoolProp), "
                             f"got {_kc(T)}")
        st = _state(cp, "PT_INPUTS", p, T, f"gas '{cp}' at temperature {_kc(T)} and pressure {_fmt(p)} Pa")
        phase = _phase(st)
        if phase not in _GAS_PHASES:
            raise ValueError(
                f"gas '{cp}' is not a gas at temperature {_kc(T)} and pressure {_fmt(p)} Pa: CoolProp "
                f"finds {_PHASE_TEXT.get(phase, 'an unknown phase')}")
        where = "at (p, T)"
    props: dict[str, float] = {}
    if model == "ideal":
        M = info["M"]
        p_gas = st.p()
        rho_ideal = p_gas * M / (MOLAR_GAS_CONSTANT * T)
        text = (f"ideal gas rho = p M/(R T) with M = {M * 1e3:.6g} g/mol ('{cp}', {where}, "
                f"R = {MOLAR_GAS_CONSTANT} J/(mol K))")
        if "rho_g" in need:
            props["rho_g"] = rho_ideal
            dev = rho_ideal / st.rhomass() - 1.0
            if abs(dev) > 0.01:
                notes.append(f"ideal-gas density of '{cp}' differs by {dev * 100:+.2g} % from the real-gas value")
    else:
        text = f"{_cp_version()} '{cp}', {where}; density: EOS {info['eos'] or 'of CoolProp'}"
        if "rho_g" in need:
            props["rho_g"] = st.rhomass()
    if "mu_g" in need:
        mu = _try(st.viscosity)
        if mu is None:
            raise ValueError(f"mu_g: CoolProp has no gas viscosity for '{cp}'; give it in overrides="
                             "{'mu_g': ...} [Pa s]")
        props["mu_g"] = mu
        text += f"; viscosity: {_cp_version()} {info['visc'] or 'model'}"
    return props, text, notes


# --------------------------------------------------------------------------------------------------
# Factory
# --------------------------------------------------------------------------------------------------
def _check_overrides(overrides) -> dict[str, float]:
    if overrides is None:
        return {}
    if not isinstance(overrides, Mapping):
        raise TypeError(f"overrides must be a mapping of property name to value, got {overrides!r}")
    out = {}
    for k, v in overrides.items():
        if k not in _PROPERTY_NAMES:
            raise ValueError(f"overrides: unknown property {k!r}; allowed: {', '.join(_PROPERTY_NAMES)}")
        out[k] = positive(k, v, _UNITS[k])
    return out


def _override_text(ov: dict[str, float], keys) -> str:
    used = [f"{k} = {_fmt(ov[k])} {_UNITS[k]}" for k in keys if k in ov]
    return f"; user override: {', '.join(used)}" if used else ""


def make_fluid_pair(liquid: str, temperature: float, pressure: float | None = None, *,
                    gas: str | None = None, gas_model: str = "auto", liquid_source: str = "auto",
                    overrides: Mapping[str, float] | None = None) -> FluidPair:
    r"""Build the liquid/gas property set for a case.

    .. math:: \rho_G^{\mathrm{ideal}} = \frac{p\,M}{R\,T}

    Parameters
    ----------
    liquid : str
        Liquid name: a CoolProp fluid (``"water"``, ``"nitrogen"``, ``"R134a"``, ...; case-insensitive,
        aliases accepted), a bundled table liquid (``"silicone-oil-5cst"``, ...), or any label with
        ``liquid_source="user"``.
    temperature : float
        T [K].
    pressure : float or None
        p [Pa]. ``None``: the saturation pressure at T when the gas is the liquid's own vapour
        (CoolProp liquid), otherwise 101325 Pa (noted).
    gas : str or None
        Gas name (CoolProp, e.g. ``"air"``, ``"helium"``). ``None``: the liquid's own saturated
        vapour for a CoolProp liquid; air for a table liquid; for a user liquid the gas properties
        must then be in ``overrides``.
    gas_model : {"auto", "vapour", "real", "ideal"}
        ``"vapour"``: saturated vapour of the liquid's own substance at T (CoolProp).
        ``"real"``: CoolProp equation of state at (p, T) (for the own substance: same as "vapour").
        ``"ideal"``: density p M/(R T), viscosity from CoolProp. ``"auto"``: "vapour" for the own
        substance, "ideal" for the default air of a table liquid, otherwise "real".
    liquid_source : {"auto", "coolprop", "table", "user"}
        Where the liquid properties come from; "auto" picks by name (the names do not overlap).
    overrides : mapping, optional
        Values that replace single properties [SI]: ``rho_l``, ``mu_l``, ``sigma``, ``rho_g``,
        ``mu_g``. They are written into the source strings.

    Returns
    -------
    FluidPair

    Notes
    -----
    * CoolProp liquids: T within [triple point, critical point); at a given (p, T) the state must be
      liquid. Surface tension is the saturation value at T (pressure effect neglected); for water it is
      IAPWS R1-76(2014), otherwise CoolProp's correlation (mostly Mulero et al. 2012). The surface
      tension is for the liquid against its own vapour; against a foreign gas it is used as is (noted).
    * Own vapour: the gas is always saturated vapour at T (p_sat(T)); if a higher pressure is given,
      the liquid is the compressed liquid at p and the vapour stays at p_sat(T) (noted).
    * Table liquids: linear density and surface tension, Andrade viscosity, inside the row's
      [T_min, T_max] only; pressure does not enter (incompressible). Values are engineering estimates
      with the stated sources; override them with the supplier's data when known.
    * Errors name the field and the allowed range; temperatures are given in K and degC.
    * Resolved pairs are kept in the persistent cache (:mod:`lowgmap.physics.cache`), keyed by the inputs,
      the property library's version and lowgmap's, so a repeated command does not load the library.

    References
    ----------
    I. H. Bell, J. Wronski, S. Quoilin, V. Lemort, "Pure and pseudo-pure fluid thermophysical property
    evaluation and the open-source thermophysical property library CoolProp", Ind. Eng. Chem. Res.
    53(6):2498-2508, 2014. doi:10.1021/ie4033999

    Examples
    --------
    >>> fp = make_fluid_pair("water", 293.15, 101325.0, gas="air")
    >>> round(fp.rho_l, 3), round(fp.mu_l * 1e3, 4), round(fp.sigma * 1e3, 2)
    (998.207, 1.0016, 72.74)
    >>> make_fluid_pair("nitrogen", 77.355).pressure > 101000
    True
    """
    try:
        key_parts = (liquid, float(temperature), None if pressure is None else float(pressure), gas, gas_model,
                     liquid_source, dict(overrides or {}), _library_version())
        key = cache.make_key("fluids.pair", *key_parts)
    except (TypeError, ValueError):       # inputs the checks below will refuse with a proper message
        key = None
    if key is not None:
        with _PAIRS_LOCK:
            kept = _PAIRS.get(key)
            if kept is not None:
                _PAIRS.move_to_end(key)
                return kept
        hit = cache.load("fluids.pair", key)
        fp = None
        if hit is not None:
            try:
                fp = _pair_from_arrays(hit)
            except (KeyError, ValueError, TypeError):
                pass                      # an entry of another layout: rebuild it
        if fp is not None:
            _keep_pair(key, fp)
            return fp
    fp = _make_fluid_pair(liquid, temperature, pressure, gas=gas, gas_model=gas_model,
                          liquid_source=liquid_source, overrides=overrides)
    if key is not None:
        cache.store("fluids.pair", key, _pair_to_arrays(fp))
        _keep_pair(key, fp)
    return fp


#: Fluid pairs built in this process, by cache key (a dashboard builds the same pair for every edit and every
#: frame of a dragged slider; reading it from the persistent cache each time costs a file read).
_PAIRS: "collections.OrderedDict[str, FluidPair]" = collections.OrderedDict()
_PAIRS_LOCK = threading.Lock()
_PAIRS_KEPT = 256


def _keep_pair(key: str, fp: FluidPair) -> None:
    with _PAIRS_LOCK:
        _PAIRS[key] = fp
        _PAIRS.move_to_end(key)
        while len(_PAIRS) > _PAIRS_KEPT:
            _PAIRS.popitem(last=False)


@functools.lru_cache(maxsize=1)
def _library_version() -> str:
    """Version of the property library, read without importing it (importing it takes seconds; read once)."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("CoolProp")
    except PackageNotFoundError:  # pragma: no cover - CoolProp is a dependency
        return "none"


_PAIR_NUMBERS = ("temperature", "pressure", "rho_l", "mu_l", "sigma", "rho_g", "mu_g")
_PAIR_TEXTS = ("liquid", "gas", "liquid_source", "gas_source")


def _pair_to_arrays(fp: FluidPair) -> dict:
    return {"numbers": np.array([getattr(fp, k) for k in _PAIR_NUMBERS], dtype=float),
            "texts": np.array([getattr(fp, k) for k in _PAIR_TEXTS], dtype=str),
            "notes": np.array(list(fp.notes), dtype=str) if fp.notes else np.zeros(0, dtype="<U1")}


def _pair_from_arrays(arrays) -> FluidPair:
    numbers, texts = arrays["numbers"], arrays["texts"]
    if numbers.shape != (len(_PAIR_NUMBERS),) or texts.shape != (len(_PAIR_TEXTS),):
        raise ValueError("cached fluid pair of another layout")
    values = {k: float(v) for k, v in zip(_PAIR_NUMBERS, numbers)}
    values.update({k: str(v) for k, v in zip(_PAIR_TEXTS, texts)})
    return FluidPair(notes=tuple(str(n) for n in arrays["notes"]), **values)


def _make_fluid_pair(liquid, temperature, pressure=None, *, gas=None, gas_model="auto", liquid_source="auto",
                     overrides=None) -> FluidPair:
    """:func:`make_fluid_pair` without the persistent cache."""
    T = positive("temperature", temperature, "K")
    p = None if pressure is None else positive("pressure", pressure, "Pa")
    if liquid_source not in _LIQUID_SOURCES:
        raise ValueError(f"liquid_source must be one of {_LIQUID_SOURCES}, got {liquid_source!r}")
    if gas_model not in _GAS_MODELS:
        raise ValueError(f"gas_model must be one of {_GAS_MODELS}, got {gas_model!r}")
    if not isinstance(liquid, str) or not liquid.strip():
        raise TypeError(f"liquid must be a non-empty string, got {liquid!r}")
    if gas is not None and (not isinstance(gas, str) or not gas.strip()):
        raise TypeError(f"gas must be a non-empty string or None, got {gas!r}")
    ov = _check_overrides(overrides)
    notes: list[str] = []

    kind, lname = _resolve_liquid(liquid, liquid_source)
    if kind == "coolprop" and _norm(liquid) in ("hydrogen", "h2", "lh2", "liquidhydrogen"):
        notes.append(_HYDROGEN_NOTE)
    if kind == "coolprop" and not _cp_info(lname)["pure"]:
        notes.append(f"'{lname}' is a pseudo-pure mixture in CoolProp: its saturated liquid is at the bubble "
                     "point, its saturated vapour at the dew point (different pressures)")
    if kind == "user":
        missing = [k for k in ("rho_l", "mu_l", "sigma") if k not in ov]
        if missing:
            raise ValueError("liquid_source='user' needs rho_l, mu_l and sigma in overrides; "
                             f"missing: {', '.join(missing)}")

    # ---- which gas, which model --------------------------------------------------------------
    gas_cp: str | None = None
    own = False
    default_air = False
    if gas is None:
        if kind == "coolprop":
            gas_cp, own = lname, True
        elif kind == "table":
            gas_cp, default_air = "Air", True
        else:
            missing = [k for k in ("rho_g", "mu_g") if k not in ov]
            if missing:
                raise ValueError(f"a user-defined liquid with gas=None needs {', '.join(missing)} in "
                                 "overrides, or a gas name (e.g. gas='air')")
    else:
        gas_cp = _resolve_gas(gas)
        own = kind == "coolprop" and gas_cp == lname
        if _norm(gas) in ("hydrogen", "h2", "lh2", "liquidhydrogen") and _HYDROGEN_NOTE not in notes:
            notes.append(_HYDROGEN_NOTE)

    model = gas_model
    if model == "auto":
        model = "vapour" if own else ("ideal" if default_air else "real")
    if model == "vapour" and not own:
        raise ValueError(
            "gas_model='vapour' needs the gas to be the liquid's own vapour (a CoolProp liquid with gas=None "
            f"or gas equal to the liquid); liquid {lname!r} is a "
            + {"coolprop": "CoolProp", "table": "table", "user": "user-defined"}[kind] + " liquid"
            + (f" and gas is {gas_cp!r}" if gas_cp and kind == "coolprop" else ""))
    if own and model == "real":
        model = "vapour"

    # ---- system pressure -----------------------------------------------------------------------
    p_liq = p
    if p is None and not own:
        p_liq = STANDARD_ATMOSPHERE
        notes.append(f"pressure not given: {STANDARD_ATMOSPHERE:.0f} Pa (1 atm) assumed")

    # ---- liquid --------------------------------------------------------------------------------
    need_l = {k for k in ("rho_l", "mu_l", "sigma") if k not in ov}
    if kind == "coolprop":
        props_l, p_used, lsrc, lnotes = _coolprop_liquid(lname, T, p_liq, need_l, p_assumed=p is None)
        notes.extend(lnotes)
    elif kind == "table":
        row = _table()[lname]
        rho, mu, sigma = row.properties(T)
        props_l = {"rho_l": rho, "mu_l": mu, "sigma": sigma}
        p_used = p_liq
        lsrc = (f"table {TABLE_PATH.name} row '{row.name}' (valid {_range_text(row.T_min, row.T_max)}; "
                f"linear density and surface tension, Andrade viscosity): {row.source}")
        notes.append("table liquid: pressure does not enter its properties; it must be above the "
                     "liquid's vapour pressure")
    else:
        props_l, p_used, lsrc = {}, (p_liq if p_liq is not None else STANDARD_ATMOSPHERE), "user values"
    props_l.update({k: ov[k] for k in ("rho_l", "mu_l", "sigma") if k in ov})
    if kind != "user":
        lsrc += _override_text(ov, ("rho_l", "mu_l", "sigma"))

    # ---- gas -----------------------------------------------------------------------------------
    need_g = {k for k in ("rho_g", "mu_g") if k not in ov}
    if gas_cp is None:
        props_g, gsrc, gname = {}, "user values", "user-defined gas"
    else:
        gname = gas_cp
        if need_g:
            props_g, gsrc, gnotes = _coolprop_gas(gas_cp, T, p_used, model, saturated=own, need=need_g)
            notes.extend(gnotes)
        else:
            props_g, gsrc = {}, f"'{gas_cp}'"
        gsrc += _override_text(ov, ("rho_g", "mu_g"))
        if default_air:
            notes.append(f"gas not given: air at {_fmt(p_used)} Pa and T, ideal-gas density")
        if own and p is not None:
            notes.append(f"the vapour is taken saturated at T (p_sat < p = {_fmt(p)} Pa)")
        if not own and kind == "coolprop":
            notes.append(f"surface tension is that of the liquid against its vapour, used against '{gas_cp}'")
    props_g.update({k: ov[k] for k in ("rho_g", "mu_g") if k in ov})

    return FluidPair(
        liquid=lname, gas=gname, temperature=T, pressure=p_used,
        rho_l=props_l["rho_l"], mu_l=props_l["mu_l"], sigma=props_l["sigma"],
        rho_g=props_g["rho_g"], mu_g=props_g["mu_g"],
        liquid_source=lsrc, gas_source=gsrc, notes=tuple(notes),
    )
