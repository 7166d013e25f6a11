"""Spherometer profiles: a small TOML file describing the instrument.

Every length in the file is in its top-level `unit`; everything here is
converted to millimetres at once.  Unknown or misspelt keys are errors (a
silently ignored typo in a leg spacing would give a wrong radius).
"""

from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from logger.analysis import geometry
from logger.checks import is_number, is_positive
from logger.errors import UserError
from logger.units import check_unit, to_mm

PROFILE_DIR = Path(__file__).resolve().parent / "profiles"  # the shipped examples

KINDS = ("three-ball", "ring", "calibrated")
SENSES = ("in-positive", "out-positive")

# Default standard uncertainties (k = 1), in millimetres, used when the
# profile's [uncertainty] table does not state them.  Common practice, from
# memory: a 150 mm digital caliper is specified to about +-0.02 mm; taken as a
# rectangular half-width that is 0.02/sqrt(3) = 0.0115 mm.  A rounded ring
# edge is hard to gauge, so its radius gets a larger default.  A calibrated
# ring radius inherits the uncertainty of its calibration, which the user
# should state; the default is a caliper-like guess.
DEFAULT_U_MM = {
    "leg_spacing": 0.02 / math.sqrt(3),
    "ball_diameter": 0.02 / math.sqrt(3),
    "inner_diameter": 0.02 / math.sqrt(3),
    "outer_diameter": 0.02 / math.sqrt(3),
    "edge_radius": 0.025,
    "ring_radius": 0.01,
    # a probe's tip is gauged less well than a ball: calipers across the spindle and a ball, less
    # half of each (common practice, from memory: a few hundredths of a millimetre at best)
    "probe_distance": 0.05,
}

# Error sources of a real rig beyond the measured inputs, as bounds (half-widths, mm) unless said;
# each enters the budget (logger.analysis.uncertainty.systematic_components).  Common practice,
# from memory:
# - flat_flatness: the reference flat's departure over the ring.  A good granite plate or thick
#   float glass keeps within about half a micrometre over a 70 mm ring; 1 um is about 7 mm of R
#   on the example rig at f/8.
# - indicator_error: the indicator's error of indication over the travel used (a sagitta of a few
#   tenths of a millimetre).  Makers state a few micrometres over the whole travel; one micrometre
#   over a short stretch is a fair guess.  Measure yours with `saglog indicator-check`.
# - probe_offset: how far the probe may sit from the circumcentre of the ball centres; R then reads
#   long by about R e^2 / r^2.  Half a millimetre for a carefully drilled home-made frame.
# - caliper_common: standard uncertainty of a caliper error shared by all three leg readings (its
#   zero or scale), k = 1; about a quarter of a +-0.02 mm caliper's specification.
DEFAULT_SYSTEMATIC_MM = {
    "flat_flatness": 0.0005,
    "indicator_error": 0.001,
    "probe_offset": 0.5,
    "caliper_common": 0.005,
}

_TOP_KEYS = {"unit", "name", "spherometer", "indicator", "uncertainty", "calibration"}
# [calibration] (kind "calibrated", written by saglog calibrate): what the measurement uses, and the record.
_CAL_USED = {"ring_radius_per_ball_diameter", "sagitta_min", "sagitta_max"}
_CAL_RECORD = {"ring_radius_u", "birge_ratio", "date", "saglog_version", "references"}
_SPH_KEYS = {
    "three-ball": ({"kind", "ball_diameter"}, {"leg_spacings", "leg_readings", "readings", "probe_distances"}),
    "ring": ({"kind", "inner_diameter", "outer_diameter"}, {"edge_radius"}),
    "calibrated": ({"kind", "ring_radius"}, {"ball_diameter"}),
}
_IND_KEYS = ({"resolution"}, {"sense", "unit"})
# [uncertainty] keys are named for the [spherometer] key they apply to; an earlier key that stood for
# several is still read: ring_diameter is both ring diameters (a stated specific one wins).
_U_EARLIER = {"ring_diameter": ("inner_diameter", "outer_diameter")}
_U_KEYS = set(DEFAULT_U_MM) | set(DEFAULT_SYSTEMATIC_MM) | set(_U_EARLIER)


@dataclass(frozen=True)
class Indicator:
    resolution_mm: float
    sense: str  # "in-positive" or "out-positive"
    unit: str  # unit assumed for stream lines that carry none

    @property
    def sign(self) -> int:
        """+1 when the reading grows as the spindle is pushed in."""
        return 1 if self.sense == "in-positive" else -1


@dataclass(frozen=True)
class Spherometer:
    """The instrument's contact geometry.

    `params_mm` holds the measured inputs (names such as 'a', 'b', 'c',
    'ball_diameter'), `u_mm` their standard uncertainties.  `contact_mm`
    maps any set of inputs to (ring radius, foot radius) for a surface, so
    the uncertainty budget and the Monte Carlo check can vary each input.
    """

    kind: str
    params_mm: dict = field(default_factory=dict)
    u_mm: dict = field(default_factory=dict)
    ball_coupling: float = 0.0  # calibrated: dr/dd of the ring radius found with this ball (unit-free)
    systematic_mm: dict = field(default_factory=dict)  # DEFAULT_SYSTEMATIC_MM's keys: the rig's other sources

    def contact_mm(self, surface: str, params: dict | None = None) -> tuple[float, float]:
        p = self.params_mm if params is None else params
        if self.kind == "three-ball":
            return geometry.circumradius_mm(*self.legs_mm(p)), p["ball_diameter"] / 2.0
        if self.kind == "ring":
            e = p["edge_radius"]
            if surface == "concave":  # bears on the outer edge
                return p["outer_diameter"] / 2.0 - e, e
            return p["inner_diameter"] / 2.0 + e, e  # convex: on the inner edge
        # calibrated: the ring radius was found with this ball, so it moves with the ball's diameter
        d = p["ball_diameter"]
        return p["ring_radius"] + self.ball_coupling * (d - self.params_mm["ball_diameter"]), d / 2.0

    def probe_offset_mm(self, params: dict | None = None):
        """The probe's distance from the circumcentre of the ball centres, when its distances to the
        balls are given (`probe_distances`), else None (the budget then carries the offset's bound)."""
        p = self.params_mm if params is None else params
        if "probe_a" not in p:
            return None
        return geometry.probe_offset_from_distances_mm(self.legs_mm(p), [p[f"probe_{x}"] for x in "abc"])

    def radius_mm(self, sagitta_mm, surface: str, params: dict | None = None):
        """R from a sagitta with these inputs: the contact geometry, and the probe's offset when known."""
        e = self.probe_offset_mm(params)
        return geometry.radius_from_sagitta_mm(sagitta_mm, *self.contact_mm(surface, params), surface,
                                               0.0 if e is None else e)

    def reading_mm(self, radius_mm: float, surface: str) -> float:
        """What this spherometer reads on a sphere of radius R (the inverse of `radius_mm`)."""
        e = self.probe_offset_mm()
        return geometry.probe_sagitta_mm(radius_mm, *self.contact_mm(surface), surface, 0.0 if e is None else e)

    def legs_mm(self, params: dict | None = None) -> tuple[float, float, float]:
        """Centre-to-centre leg spacings, from the spacings or from caliper readings over the balls.

        Outside-to-outside of two balls = centre distance + one ball diameter,
        inside-to-inside = centre distance - one (common practice).  Kept as
        readings, the legs share the ball's error, which the budget and the
        Monte Carlo check then see, because they vary the readings and the ball.
        """
        p = self.params_mm if params is None else params
        if "a" in p:
            return p["a"], p["b"], p["c"]
        d = p["ball_diameter"]
        if "outside_a" in p:
            return p["outside_a"] - d, p["outside_b"] - d, p["outside_c"] - d
        return p["inside_a"] + d, p["inside_b"] + d, p["inside_c"] + d

    def describe(self, unit: str = "mm") -> str:
        from logger.units import from_mm

        shown = {k: f"{from_mm(v, unit):g} {unit}" for k, v in self.params_mm.items()}
        legs = [shown.pop(k) for k in ("a", "b", "c") if k in shown]
        probe = [shown.pop(f"probe_{x}") for x in "abc" if f"probe_{x}" in shown]
        parts = ([f"leg spacings a, b, c {', '.join(legs)}"] if legs else []) + [
            f"{k.replace('_', ' ')} {v}" for k, v in shown.items()] + (
            [f"probe to balls A, B, C {', '.join(probe)}"] if probe else [])
        return f"{self.kind} ({'; '.join(parts)})"


@dataclass(frozen=True)
class Profile:
    unit: str  # the file's unit, used to show results to the user
    spherometer: Spherometer
    indicator: Indicator
    name: str = ""
    source: str = ""  # where it was read from, for messages
    calibrated_sagitta_mm: tuple[float, float] | None = None  # the sagitta range a calibration covered

    def contact_mm(self, surface: str) -> tuple[float, float]:
        return self.spherometer.contact_mm(surface)


def _check_keys(table: dict, required: set, optional: set, where: str) -> None:
    allowed = required | optional
    for key in table:
        if key not in allowed:
            hint = difflib.get_close_matches(key, sorted(allowed), n=1)
            tip = f" (did you mean {hint[0]!r}?)" if hint else f" (allowed: {', '.join(sorted(allowed))})"
            raise UserError(f"{where}: unknown key {key!r}{tip}")
    for key in sorted(required):
        if key not in table:
            raise UserError(f"{where}: missing key {key!r}")


def _length(value, unit: str, where: str, allow_zero: bool = False) -> float:
    if not is_number(value):
        raise UserError(f"{where}: must be a number, got {value!r}")
    if not is_positive(value, allow_zero):
        raise UserError(f"{where}: must be {'zero or ' if allow_zero else ''}positive, got {value!r}")
    return to_mm(float(value), unit)


def parse_profile(data: dict, source: str = "profile") -> Profile:
    """Build a Profile from parsed TOML; every error names `source` and the key."""
    if not isinstance(data, dict):
        raise UserError(f"{source}: not a TOML table")
    _check_keys(data, {"unit", "spherometer", "indicator"}, _TOP_KEYS - {"unit", "spherometer", "indicator"}, source)
    unit = check_unit(data["unit"], f"{source}: unit")
    sph = data["spherometer"]
    if not isinstance(sph, dict):
        raise UserError(f"{source}: [spherometer] must be a table")
    kind = sph.get("kind")
    if kind not in KINDS:
        raise UserError(f"{source}: [spherometer] kind must be one of {', '.join(KINDS)}, not {kind!r}")
    req, opt = _SPH_KEYS[kind]
    where = f"{source}: [spherometer]"
    _check_keys(sph, req, opt, where)
    u_of = _uncertainties(data, unit, source)
    params, u = _KIND_PARAMS[kind](sph, unit, where, u_of)
    coupling, sag_range = _calibration(data.get("calibration"), kind, unit, source)
    systematic = {k: u_of[k] for k in DEFAULT_SYSTEMATIC_MM if k != "caliper_common" or kind == "three-ball"}
    spherometer = Spherometer(kind, params, u, coupling, systematic)
    indicator = _indicator(data["indicator"], unit, source)
    name = data.get("name", "")
    if not isinstance(name, str):
        raise UserError(f"{source}: name must be a string")
    return Profile(unit, spherometer, indicator, name, source, sag_range)


def _uncertainties(data: dict, unit: str, source: str) -> dict[str, float]:
    """The [uncertainty] table (mm), with the defaults for what it does not state."""
    ut = data.get("uncertainty", {})
    if not isinstance(ut, dict):
        raise UserError(f"{source}: [uncertainty] must be a table")
    _check_keys(ut, set(), _U_KEYS, f"{source}: [uncertainty]")
    stated = {k: _length(v, unit, f"{source}: [uncertainty] {k}", allow_zero=True) for k, v in ut.items()}
    for earlier, keys in _U_EARLIER.items():
        for k in keys:
            if earlier in stated and k not in stated:
                stated[k] = stated[earlier]
    return {k: stated.get(k, default) for k, default in (DEFAULT_U_MM | DEFAULT_SYSTEMATIC_MM).items()}


def _three_ball(sph: dict, unit: str, where: str, u_of: dict) -> tuple[dict, dict]:
    """Leg spacings (centre to centre, or caliper readings over the balls) and the ball diameter."""
    if ("leg_spacings" in sph) == ("leg_readings" in sph):
        raise UserError(f"{where} give either leg_spacings (centre to centre) or "
                        "leg_readings with readings = \"outside\" or \"inside\"")
    if "leg_readings" in sph:
        how = sph.get("readings")
        if how not in ("outside", "inside"):
            raise UserError(f"{where} readings must be \"outside\" or \"inside\", not {how!r}")
        key, names = "leg_readings", [f"{how}_{x}" for x in "abc"]
    else:
        if "readings" in sph:
            raise UserError(f"{where} readings goes with leg_readings, not leg_spacings")
        key, names = "leg_spacings", list("abc")
    legs = sph[key]
    if not isinstance(legs, list) or len(legs) != 3:
        raise UserError(f"{where} {key} must be a list of three lengths")
    params: dict[str, float] = {}
    u: dict[str, float] = {}
    for name, v in zip(names, legs):
        params[name] = _length(v, unit, f"{where} {key}", False)
        u[name] = u_of["leg_spacing"]
    params["ball_diameter"] = _length(sph["ball_diameter"], unit, f"{where} ball_diameter", allow_zero=True)
    u["ball_diameter"] = u_of["ball_diameter"]
    legs_mm = Spherometer("three-ball", params, u).legs_mm()
    try:
        r = geometry.circumradius_mm(*legs_mm)
    except UserError as exc:  # name the file and key, not just the numbers
        raise UserError(f"{where} {key}: {exc}") from None
    if params["ball_diameter"] / 2 >= r or params["ball_diameter"] > min(legs_mm):
        raise UserError(f"{where} ball_diameter is too large for the leg spacings (the balls would overlap)")
    if "probe_distances" in sph:
        _probe_distances(sph["probe_distances"], unit, f"{where} probe_distances", params, u, u_of, r)
    return params, u


def _probe_distances(values, unit: str, where: str, params: dict, u: dict, u_of: dict, ring_mm: float) -> None:
    """The probe's tip to the centres of balls A, B, C (ball A faces leg spacing a), in the balls' plane."""
    if not isinstance(values, list) or len(values) != 3:
        raise UserError(f"{where} must be a list of three lengths (to the balls facing leg spacings a, b, c)")
    for x, v in zip("abc", values):
        params[f"probe_{x}"] = _length(v, unit, where)
        u[f"probe_{x}"] = u_of["probe_distance"]
    e = Spherometer("three-ball", params).probe_offset_mm()
    if not e < ring_mm:
        raise UserError(f"{where} put the probe {e:.4g} mm from the centre, outside the ring of the balls "
                        f"({ring_mm:.4g} mm): check the order (ball A faces leg spacing a) and the unit")


def _ring(sph: dict, unit: str, where: str, u_of: dict) -> tuple[dict, dict]:
    """A ring spherometer: inner and outer diameter and the edge radius."""
    params = {"inner_diameter": _length(sph["inner_diameter"], unit, f"{where} inner_diameter"),
              "outer_diameter": _length(sph["outer_diameter"], unit, f"{where} outer_diameter")}
    params["edge_radius"] = (_length(sph["edge_radius"], unit, f"{where} edge_radius", allow_zero=True)
                             if "edge_radius" in sph else 0.0)
    if params["inner_diameter"] >= params["outer_diameter"]:
        raise UserError(f"{where} inner_diameter must be smaller than outer_diameter")
    if params["inner_diameter"] / 2 + params["edge_radius"] > params["outer_diameter"] / 2 - params["edge_radius"]:
        raise UserError(f"{where} edge_radius is too large for the ring's wall")
    return params, {"inner_diameter": u_of["inner_diameter"], "outer_diameter": u_of["outer_diameter"],
                    "edge_radius": u_of["edge_radius"]}


def _calibrated(sph: dict, unit: str, where: str, u_of: dict) -> tuple[dict, dict]:
    """A calibrated contact circle: its radius and the ball diameter."""
    params = {"ring_radius": _length(sph["ring_radius"], unit, f"{where} ring_radius")}
    params["ball_diameter"] = (_length(sph["ball_diameter"], unit, f"{where} ball_diameter", allow_zero=True)
                               if "ball_diameter" in sph else 0.0)
    if params["ball_diameter"] / 2 >= params["ring_radius"]:
        raise UserError(f"{where} ball_diameter is too large for the ring_radius")
    return params, {"ring_radius": u_of["ring_radius"], "ball_diameter": u_of["ball_diameter"]}


# kind -> reader of its [spherometer] table: (params_mm, u_mm)
_KIND_PARAMS = {"three-ball": _three_ball, "ring": _ring, "calibrated": _calibrated}


def _indicator(ind, unit: str, source: str) -> Indicator:
    if not isinstance(ind, dict):
        raise UserError(f"{source}: [indicator] must be a table")
    _check_keys(ind, *_IND_KEYS, f"{source}: [indicator]")
    ind_unit = check_unit(ind.get("unit", unit), f"{source}: [indicator] unit")
    resolution_mm = _length(ind["resolution"], unit, f"{source}: [indicator] resolution")  # file unit, like every length
    sense = ind.get("sense", "in-positive")
    if sense not in SENSES:
        raise UserError(f"{source}: [indicator] sense must be 'in-positive' or 'out-positive', not {sense!r}")
    return Indicator(resolution_mm, sense, ind_unit)


def _calibration(table, kind: str, unit: str, source: str) -> tuple[float, tuple[float, float] | None]:
    """The [calibration] record of a calibrated profile: the ball coefficient and the sagitta range it covered."""
    if table is None:
        return 0.0, None
    where = f"{source}: [calibration]"
    if kind != "calibrated":
        raise UserError(f"{where}: belongs to a profile of kind \"calibrated\"")
    if not isinstance(table, dict):
        raise UserError(f"{where} must be a table")
    _check_keys(table, _CAL_USED, _CAL_RECORD, where)
    coupling = table["ring_radius_per_ball_diameter"]
    if not is_number(coupling):
        raise UserError(f"{where} ring_radius_per_ball_diameter: must be a number, got {coupling!r}")
    lo, hi = (_length(table[k], unit, f"{where} {k}") for k in ("sagitta_min", "sagitta_max"))
    if lo > hi:
        raise UserError(f"{where}: sagitta_min is larger than sagitta_max")
    return float(coupling), (lo, hi)


def shipped_profiles() -> list[str]:
    """Names of the profiles that ship with the package (logger/config/profiles)."""
    return sorted(p.stem for p in PROFILE_DIR.glob("*.toml"))


def profile_words(path: str | Path) -> str:
    """How to name a profile to the user: a shipped one by its name (its path lies inside the package,
    which means nothing on another install), any other by its path."""
    p = Path(path)
    return p.stem if p.parent.resolve() == PROFILE_DIR.resolve() and p.suffix == ".toml" else str(p)


def resolve_profile(ref: str | Path) -> Path:
    """A path to a TOML file, or the name of a shipped profile; a path wins when both exist."""
    p = Path(ref)
    if p.exists() or p.suffix == ".toml" or len(p.parts) > 1:
        return p
    named = PROFILE_DIR / f"{p.name}.toml"
    return named if named.is_file() else p


def load_profile(path: str | Path) -> Profile:
    """Read and check a profile (a file, or a shipped profile by name); every problem is a one-line UserError."""
    p = resolve_profile(path)
    try:
        text = p.read_bytes().decode("utf-8")
    except FileNotFoundError:
        raise UserError(f"{p}: profile not found (a TOML file, or one of the shipped profiles: "
                        f"{', '.join(shipped_profiles())})") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise UserError(f"{p}: cannot read profile ({exc.__class__.__name__}: {exc})") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise UserError(f"{p}: TOML syntax error: {exc}") from None
    return parse_profile(data, str(p))

