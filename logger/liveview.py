"""What the person at the stand sees and hears while capturing.

`LiveView` (a terminal): a rich panel redrawn a few times a second in place
(no flicker), with the radius in large block digits so it reads from two
metres.  `PlainLog` (stdout is not a terminal): one timestamped line per
event, for logs and scripts.  `Cues`: terminal bell patterns -- one ring when
a seating is accepted, two for a rejected seating, three when the zero is set.
"""

from __future__ import annotations

import sys
import threading
import time

from rich.console import Console, Group
from rich.live import Live
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from .pipeline import Listener
from .present import _len
from .runfolder import iso_utc
from .session import FLAT
from .units import from_mm

# A 3x5 block font of our own for the big number.
_GLYPHS = {
    "0": ["███", "█ █", "█ █", "█ █", "███"], "1": [" █ ", "██ ", " █ ", " █ ", "███"],
    "2": ["███", "  █", "███", "█  ", "███"], "3": ["███", "  █", "███", "  █", "███"],
    "4": ["█ █", "█ █", "███", "  █", "  █"], "5": ["███", "█  ", "███", "  █", "███"],
    "6": ["███", "█  ", "███", "█ █", "███"], "7": ["███", "  █", "  █", "  █", "  █"],
    "8": ["███", "█ █", "███", "█ █", "███"], "9": ["███", "█ █", "███", "  █", "███"],
    ".": ["   ", "   ", "   ", "   ", " █ "], "-": ["   ", "   ", "███", "   ", "   "],
    " ": ["   ", "   ", "   ", "   ", "   "],
}


def big_digits(text: str) -> str:
    rows = ["", "", "", "", ""]
    for ch in text:
        g = _GLYPHS.get(ch, _GLYPHS[" "])
        for i in range(5):
            rows[i] += g[i] + " "
    return "\n".join(rows)


def phase_text(summary: dict) -> str:
    if summary.get("seatings_surface"):
        return "measuring the surface"
    if summary.get("seatings_flat"):
        return "zero set - seat the surface (or the flat again)"
    return "zeroing on the flat"


class Cues(Listener):
    """Bell patterns so the person need not look at the screen."""

    def __init__(self, stream=None, enabled: bool = True):
        self.stream = stream or sys.stderr
        self.enabled = enabled
        self._zero_set = False

    GAP_S = 0.25  # between rings, so that terminals sound each one

    def ring(self, times: int) -> None:
        """Ring `times` bells, spaced out on a timer thread so the capture loop never waits."""
        if not self.enabled:
            return
        for k in range(times):
            threading.Timer(k * self.GAP_S, self._bell).start()

    def _bell(self) -> None:
        try:
            self.stream.write("\a")
            self.stream.flush()
        except (OSError, ValueError):
            pass  # the terminal went away: no bell, nothing else lost

    def seating(self, seating, result) -> None:
        d = result.decisions[seating.index]
        if not d.accepted:
            self.ring(2)
        elif d.phase == FLAT and not self._zero_set:
            self._zero_set = True
            self.ring(3)
        else:
            self.ring(1)


class _Status(Listener):
    """Keeps the latest of everything a view shows."""

    def __init__(self):
        self.current = "waiting for device"
        self.value_mm = None
        self.summary: dict = {}
        self.last_event = ""
        self.device = ""

    def reading(self, reading, state):
        if reading.value_mm is not None:
            self.value_mm = reading.value_mm

    def state_changed(self, state):
        self.current = state

    def seating(self, seating, result):
        d = result.decisions[seating.index]
        self.summary = result.summary
        verdict = "accepted" if d.accepted else f"rejected ({d.reason})"
        self.last_event = f"seating {seating.index + 1} on the {d.phase}: {verdict}"


class LiveView(_Status):
    """A rich panel, refreshed in place about four times a second."""

    def __init__(self, unit: str, console: Console | None = None):
        super().__init__()
        self.unit = unit
        self.console = console or Console()
        self._live = Live(self._render(), console=self.console, refresh_per_second=4, transient=False)

    def __enter__(self):
        self._live.__enter__()
        return self

    def __exit__(self, *exc):
        self._live.update(self._render())
        return self._live.__exit__(*exc)

    def state(self, state):
        self.state_changed(state)

    def refresh(self, summary: dict | None = None) -> None:
        if summary is not None:
            self.summary = summary
        self._live.update(self._render())

    def _render(self):
        s, u = self.summary, self.unit
        radius = s.get("radius_mm")
        big = big_digits(f"{from_mm(radius, u):.1f}" if radius is not None else "-")
        t = Table.grid(padding=(0, 2))
        t.add_column(style="bold")
        t.add_column()
        t.add_row("state", Text(self.current.upper(), style="reverse bold" if self.current == "seated" else "bold"))
        t.add_row("reading", _len(self.value_mm, u, 4) if self.value_mm is not None else "-")
        t.add_row("phase", phase_text(s))
        t.add_row("seatings", f"{s.get('seatings_flat', 0)} flat, {s.get('seatings_surface', 0)} surface, "
                              f"{s.get('seatings_rejected', 0)} rejected")
        t.add_row("last", self.last_event or "-")
        t.add_row("zero", _len(s.get("zero_mm"), u, 4))
        sag_u = s.get("sagitta_u_mm")
        t.add_row("sagitta", _len(s.get("sagitta_mm"), u, 5) + (f" +- {_len(sag_u, u, 5)}" if sag_u else ""))
        U = s.get("radius_U_mm")
        t.add_row("radius", _len(radius, u, 1) + (f" +- {_len(U, u, 1)} (~95 %)" if U else ""))
        fr = s.get("focal_ratio")
        t.add_row("focal length", _len(s.get("focal_length_mm"), u, 1) + (f"   f/{fr:.2f}" if fr else ""))
        if s.get("target_radius_mm") is not None:
            t.add_row("to go", f"radius {_len(s.get('radius_to_go_mm'), u, 1)}, "
                               f"sagitta at the ring {_len(s.get('sagitta_to_go_mm'), u, 5)}")
        return Panel(Group(Text(big, style="bold"), Text(f"radius of curvature [{u}]"), t),
                     title=f"saglog  {self.device}", border_style="bold")


class PlainLog(_Status):
    """One timestamped line per event, for when stdout is not a terminal."""

    def __init__(self, unit: str, stream=None):
        super().__init__()
        self.unit = unit
        self.stream = stream or sys.stdout

    def say(self, text: str) -> None:
        self.stream.write(f"{iso_utc(time.time())} {text}\n")
        self.stream.flush()

    def state(self, state):
        self.state_changed(state)
        if state == "seated":
            self.say("seated")

    def seating(self, seating, result):
        super().seating(seating, result)
        s, u = result.summary, self.unit
        self.say(self.last_event)
        if s.get("radius_mm") is not None:
            U = s.get("radius_U_mm")
            self.say(f"radius {_len(s['radius_mm'], u, 1)}" + (f" +- {_len(U, u, 1)}" if U else " (uncertainty not estimable)")
                     + f"; focal length {_len(s['focal_length_mm'], u, 1)}")

    def refresh(self, summary=None):
        pass


class Fanout(Listener):
    """Pass every event on to several listeners (view and cues)."""

    def __init__(self, *listeners):
        self.listeners = listeners

    def reading(self, reading, state):
        for lst in self.listeners:
            lst.reading(reading, state)

    def seating(self, seating, result):
        for lst in self.listeners:
            lst.seating(seating, result)

    def state(self, state):
        for lst in self.listeners:
            lst.state(state)
