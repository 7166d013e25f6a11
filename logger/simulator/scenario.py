"""Scenarios for the virtual indicator: small TOML files, checked strictly.

Every length in a scenario file is in its top-level `unit` and becomes
millimetres here, exactly like a profile.  A misspelt key is an error naming
the file and the key, because a silently ignored typo would make a test or a
demo mean something else than it says.
"""

from __future__ import annotations

import dataclasses
import difflib
import tomllib
from dataclasses import dataclass
from pathlib import Path

from logger.analysis import geometry
from logger.checks import is_positive
from logger.errors import UserError
from logger.config.profile import PROFILE_DIR, Profile, load_profile
from logger.units import check_unit, to_mm
from logger.words import plural

SCENARIO_DIR = Path(__file__).resolve().parent / "scenarios"
DEFAULT_SCENARIO = "mirror-150-f8-rough"

ENDINGS = {"LF": b"\n", "CR": b"\r", "CRLF": b"\r\n"}
SUFFIXES_MM = ("mm",)
SUFFIXES_IN = ("in", "inch", '"')


@dataclass(frozen=True)
class Scenario:
    """A session with the virtual indicator.  Lengths in mm, times in s.

    See docs/streams.md for the TOML keys that set each field.
    """

    name: str
    profile: Profile
    surface: str = "concave"  # or "convex", or "pair": surface seatings alternate mirror (concave) and tool (convex)
    radius_mm: float = 2400.0
    flat_error_mm: float = 0.0  # the flat's own sagitta over the ring (positive: it bulges, pushes the spindle in)
    # the instrument's true geometry where it differs from its profile (None: as the profile says)
    true_legs_mm: tuple[float, float, float] | None = None
    true_ball_mm: float | None = None
    probe_offset_mm: float = 0.0  # the probe's true distance from the circumcentre of the ball centres
    indicator_scale_error: float = 0.0  # the display moves by (1 + g) per unit of true travel
    systematics: bool = False  # draw the four above and the true legs per session (logger.simulator.systematics)
    # session plan
    flat_before: int = 5
    surface_seatings: int = 8
    flat_after: int = 5
    seated_s: float = 3.0
    lifted_s: float = 2.0
    lead_in_s: float = 2.0
    tail_s: float = 2.0
    lift_mm: float = 1.5  # travel to the spindle stop beyond the deepest seated position
    # errors
    scatter_mm: float = 0.0008  # per-seating standard deviation
    noise_mm: float = 0.0002  # per-sample standard deviation
    step_mm: float | None = None  # indicator step; None: the profile's resolution
    settle_tau_s: float = 0.12
    overshoot: float = 0.0  # fraction of the jump
    lift_tau_s: float = 0.04
    drift_mm_per_min: float = 0.0
    zero_mm: float = 0.0  # what the indicator shows on the flat at t = 0
    grit_probability: float = 0.0
    grit_seatings: tuple[int, ...] = ()  # 1-based seating numbers
    grit_offset_mm: float = 0.02
    rock_probability: float = 0.0
    rock_seatings: tuple[int, ...] = ()
    rock_amplitude_mm: float = 0.006
    # stream
    mode: str = "continuous"  # or "on-change"
    rate_hz: float = 10.0
    unit: str = "mm"  # unit of the stream lines
    sign: str = "always"  # or "negative"
    decimal: str = "."
    suffix: str = ""  # text after the number, e.g. " mm", "in", '"'
    ending: str = "CRLF"
    width: int = 0  # pad the number to this many characters
    pad: str = " "  # with spaces or "0"
    decimals: int | None = None  # None: from the step
    poll: str = ""  # non-empty: answer only when this request arrives (backslash escapes, e.g. "?\\r")
    # faults
    garbage_per_min: float = 0.0
    half_line_at_start: bool = False
    disconnect_at_s: float | None = None
    disconnect_for_s: float | None = None  # None: the device never comes back
    seed: int = 1
    start_utc: str = "2025-01-06T09:00:00Z"  # start time written into recordings
    description: str = ""
    source: str = ""

    @property
    def poll_request(self) -> bytes:
        """The request bytes of a polled indicator (escapes such as \\r decoded), b"" for a streaming one."""
        return self.poll.encode("latin-1").decode("unicode_escape").encode("latin-1") if self.poll else b""

    @property
    def step(self) -> float:
        return self.profile.indicator.resolution_mm if self.step_mm is None else self.step_mm

    @property
    def seatings_total(self) -> int:
        return self.flat_before + self.surface_seatings + self.flat_after

    def contact_mm(self, surface: str) -> tuple[float, float]:
        """The TRUE ring and foot radius: the profile's, unless [instrument] says otherwise (three-ball)."""
        ring_mm, foot_mm = self.profile.contact_mm(surface)
        if self.true_legs_mm is not None:
            ring_mm = geometry.circumradius_mm(*self.true_legs_mm)
        return ring_mm, foot_mm if self.true_ball_mm is None else self.true_ball_mm / 2.0

    def with_overrides(self, **kw) -> "Scenario":
        """A copy with some fields changed (lengths in mm), checked again."""
        unknown = set(kw) - {f.name for f in dataclasses.fields(self)}
        if unknown:
            raise UserError(f"unknown scenario {plural(len(unknown), 'field')}: {', '.join(sorted(unknown))}")
        s = dataclasses.replace(self, **kw)
        s.validate()
        return s

    def _check_instrument(self, where: str) -> None:
        """[instrument]: the true geometry of a three-ball spherometer, a triangle the balls fit."""
        if self.true_legs_mm is None and self.true_ball_mm is None:
            return
        if self.profile.spherometer.kind != "three-ball":
            raise UserError(f"{where}: [instrument] describes a three-ball spherometer; the profile is not one")
        if self.true_legs_mm is not None:
            try:
                geometry.circumradius_mm(*self.true_legs_mm)
            except UserError as exc:
                raise UserError(f"{where}: [instrument] leg_spacings: {exc}") from None

    def validate(self) -> None:
        where = self.source or self.name
        if self.surface not in ("concave", "convex", "pair"):
            raise UserError(f"{where}: surface must be 'concave', 'convex' or 'pair', not {self.surface!r}")
        self._check_instrument(where)
        for key in ("flat_before", "surface_seatings", "flat_after"):
            v = getattr(self, key)
            if isinstance(v, bool) or not isinstance(v, int) or v < 0:
                raise UserError(f"{where}: {key} must be a whole number >= 0, got {v!r}")
        if self.seatings_total == 0:
            raise UserError(f"{where}: the plan has no seatings")
        for key in ("radius_mm", "seated_s", "lifted_s", "lift_mm", "settle_tau_s", "lift_tau_s", "rate_hz",
                    "step"):
            v = getattr(self, key)
            if not is_positive(v):
                raise UserError(f"{where}: {key} must be a positive number, got {v!r}")
        for key in ("lead_in_s", "tail_s", "scatter_mm", "noise_mm", "grit_offset_mm", "rock_amplitude_mm",
                    "garbage_per_min", "overshoot"):
            v = getattr(self, key)
            if not is_positive(v, allow_zero=True):
                raise UserError(f"{where}: {key} must be a number >= 0, got {v!r}")
        if not 1 <= self.rate_hz <= 20000:
            raise UserError(f"{where}: rate must be between 1 and 20000 lines per second, got {self.rate_hz!r}")
        if self.overshoot >= 1:
            raise UserError(f"{where}: overshoot is a fraction of the jump, below 1, got {self.overshoot!r}")
        for key in ("grit_probability", "rock_probability"):
            if not 0 <= getattr(self, key) <= 1:
                raise UserError(f"{where}: {key} must be between 0 and 1")
        for key in ("grit_seatings", "rock_seatings"):
            for n in getattr(self, key):
                if not (isinstance(n, int) and 1 <= n <= self.seatings_total):
                    raise UserError(f"{where}: {key} holds {n!r}, not a seating number 1..{self.seatings_total}")
        if self.mode not in ("continuous", "on-change"):
            raise UserError(f"{where}: mode must be 'continuous' or 'on-change', not {self.mode!r}")
        if self.unit not in ("mm", "in"):
            raise UserError(f"{where}: stream unit must be 'mm' or 'in', not {self.unit!r}")
        if self.sign not in ("always", "negative"):
            raise UserError(f"{where}: sign must be 'always' or 'negative', not {self.sign!r}")
        if self.decimal not in (".", ","):
            raise UserError(f"{where}: decimal must be '.' or ',', not {self.decimal!r}")
        word = self.suffix.strip().lower()
        if word and word not in (SUFFIXES_MM if self.unit == "mm" else SUFFIXES_IN):
            raise UserError(f"{where}: suffix {self.suffix!r} does not name the stream unit {self.unit!r}")
        if self.suffix and self.suffix.strip(" ") != self.suffix.lstrip(" ").rstrip():
            raise UserError(f"{where}: suffix may only have spaces before the unit")
        if self.ending not in ENDINGS:
            raise UserError(f"{where}: ending must be one of {', '.join(ENDINGS)}, not {self.ending!r}")
        if self.pad not in (" ", "0"):
            raise UserError(f"{where}: pad must be ' ' or '0', not {self.pad!r}")
        if not (isinstance(self.width, int) and 0 <= self.width <= 40):
            raise UserError(f"{where}: width must be 0..40")
        if self.decimals is not None and not (isinstance(self.decimals, int) and 0 <= self.decimals <= 8):
            raise UserError(f"{where}: decimals must be 0..8")
        if self.disconnect_at_s is not None and not self.disconnect_at_s > 0:
            raise UserError(f"{where}: disconnect_at must be a positive time")
        if self.disconnect_for_s is not None and not self.disconnect_for_s > 0:
            raise UserError(f"{where}: disconnect_for must be a positive time")
        if isinstance(self.seed, bool) or not isinstance(self.seed, int) or self.seed < 0:
            raise UserError(f"{where}: seed must be a whole number >= 0, got {self.seed!r}")


# TOML layout: table -> {key: (field, kind)}; kind 'L' is a length in the file's unit.
_LAYOUT = {
    "": {"name": ("name", str), "description": ("description", str), "profile": ("profile", str),
         "unit": ("file_unit", str), "seed": ("seed", int), "start_utc": ("start_utc", str)},
    "surface": {"kind": ("surface", str), "radius": ("radius_mm", "L")},
    "flat": {"error": ("flat_error_mm", "S")},
    "instrument": {"leg_spacings": ("true_legs_mm", "L3"), "ball_diameter": ("true_ball_mm", "L")},
    "plan": {"flat_before": ("flat_before", int), "surface": ("surface_seatings", int),
             "flat_after": ("flat_after", int), "seated": ("seated_s", float), "lifted": ("lifted_s", float),
             "lead_in": ("lead_in_s", float), "tail": ("tail_s", float), "lift": ("lift_mm", "L")},
    "indicator": {"scatter": ("scatter_mm", "L"), "noise": ("noise_mm", "L"), "step": ("step_mm", "L"),
                  "settle_tau": ("settle_tau_s", float), "overshoot": ("overshoot", float),
                  "lift_tau": ("lift_tau_s", float), "drift_per_min": ("drift_mm_per_min", "S"),
                  "zero": ("zero_mm", "S")},
    "grit": {"probability": ("grit_probability", float), "seatings": ("grit_seatings", list),
             "offset": ("grit_offset_mm", "L")},
    "rock": {"probability": ("rock_probability", float), "seatings": ("rock_seatings", list),
             "amplitude": ("rock_amplitude_mm", "L")},
    "stream": {"mode": ("mode", str), "rate": ("rate_hz", float), "unit": ("unit", str), "sign": ("sign", str),
               "decimal": ("decimal", str), "suffix": ("suffix", str), "ending": ("ending", str),
               "width": ("width", int), "pad": ("pad", str), "decimals": ("decimals", int),
               "poll": ("poll", str)},
    "faults": {"garbage_per_min": ("garbage_per_min", float), "half_line_at_start": ("half_line_at_start", bool),
               "disconnect_at": ("disconnect_at_s", float), "disconnect_for": ("disconnect_for_s", float)},
}


def _typed(value, kind, where):
    if kind is str:
        if not isinstance(value, str):
            raise UserError(f"{where}: must be a string, got {value!r}")
        return value
    if kind is bool:
        if not isinstance(value, bool):
            raise UserError(f"{where}: must be true or false, got {value!r}")
        return value
    if kind is int:
        if isinstance(value, bool) or not isinstance(value, int):
            raise UserError(f"{where}: must be a whole number, got {value!r}")
        return value
    if kind == "L3":
        if not (isinstance(value, list) and len(value) == 3
                and all(is_positive(x) for x in value)):
            raise UserError(f"{where}: must be a list of three positive lengths, got {value!r}")
        return value
    if kind is list:
        if not isinstance(value, list) or not all(isinstance(n, int) and not isinstance(n, bool) for n in value):
            raise UserError(f"{where}: must be a list of seating numbers, got {value!r}")
        return tuple(value)
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise UserError(f"{where}: must be a number, got {value!r}")
    return float(value)


def parse_scenario(data: dict, source: str, base_dir: Path) -> Scenario:
    kw: dict = {}
    raw: dict = {}
    for table, keys in _LAYOUT.items():
        tab = data if table == "" else data.get(table, {})
        where = source if table == "" else f"{source}: [{table}]"
        if not isinstance(tab, dict):
            raise UserError(f"{where} must be a table")
        allowed = set(keys) | (set(_LAYOUT) - {""} if table == "" else set())
        for key in tab:
            if key not in allowed:
                hint = difflib.get_close_matches(key, sorted(allowed), n=1)
                raise UserError(f"{where}: unknown key {key!r}" + (f" (did you mean {hint[0]!r}?)" if hint else ""))
        for key, (name, kind) in keys.items():
            if key in tab:
                want = float if kind in ("L", "S") else kind  # L: length >= 0, S: signed, L3: three lengths
                raw[name] = (_typed(tab[key], want, f"{where} {key}"), kind)
    if "profile" not in raw:
        raise UserError(f"{source}: missing key 'profile' (a profile file, or the name of a shipped profile)")
    file_unit = check_unit(raw.pop("file_unit", ("mm", str))[0], f"{source}: unit")
    for name, (value, kind) in raw.items():
        if kind in ("L", "S"):
            value = to_mm(value, file_unit)
        if kind == "L3":
            value = tuple(to_mm(float(v), file_unit) for v in value)
        kw[name] = value
    kw["profile"] = _find_profile(kw["profile"], base_dir, source)
    if "unit" in kw:
        kw["unit"] = check_unit(kw["unit"], f"{source}: [stream] unit")
    kw.setdefault("name", Path(source).stem)
    s = Scenario(source=source, **kw)
    s.validate()
    return s


def _find_profile(ref: str, base_dir: Path, source: str) -> Profile:
    for cand in (base_dir / ref, PROFILE_DIR / ref, PROFILE_DIR / f"{ref}.toml"):
        if cand.is_file():
            return load_profile(cand)
    raise UserError(f"{source}: profile {ref!r} not found (next to the scenario or among the shipped profiles)")


def scenario_names() -> list[str]:
    return sorted(p.stem for p in SCENARIO_DIR.glob("*.toml"))


def load_scenario(path_or_name: str | Path | None = None) -> Scenario:
    """A scenario from a TOML file, or by name (a file stem in logger/simulator/scenarios)."""
    ref = DEFAULT_SCENARIO if path_or_name is None else path_or_name
    p = Path(ref)
    if not p.is_file():
        named = SCENARIO_DIR / f"{ref}.toml"
        if not named.is_file():
            raise UserError(f"{ref}: no such scenario file or name (names: {', '.join(scenario_names())})")
        p = named
    try:
        data = tomllib.loads(p.read_bytes().decode("utf-8"))
    except (OSError, UnicodeDecodeError) as exc:
        raise UserError(f"{p}: cannot read scenario ({exc})") from None
    except tomllib.TOMLDecodeError as exc:
        raise UserError(f"{p}: TOML syntax error: {exc}") from None
    return parse_scenario(data, str(p), p.parent)


