"""The live panel on a terminal: a rich panel redrawn in place about five times a second.

The radius stands in large block digits so it reads from two metres (scaled to
the panel's width: the wider the terminal, the larger); below it the state, the
reading, the counts, the last verdict and the result.
"""

from __future__ import annotations

import time

from rich.console import Console, Group
from rich.live import Live
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from logger.live.present import length_text, to_go, to_go_words
from logger.live.status import RunStatus
from logger.units import from_mm

REDRAW_EVERY_S = 0.2  # about five times a second, apart from the recording's flush

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


SCALES = (4, 3, 2, 1)  # block sizes, largest first: each glyph cell becomes `scale` columns wide


def big_digits(text: str, scale: int = 1) -> str:
    """`text` in the 3x5 block font, each cell `scale` columns wide and (scale + 1) // 2 rows tall, so the
    digits keep their shape (a terminal cell is about twice as tall as it is wide)."""
    tall = (scale + 1) // 2
    rows = [""] * 5
    for ch in text:
        g = _GLYPHS.get(ch, _GLYPHS[" "])
        for i in range(5):
            rows[i] += "".join(c * scale for c in g[i]) + " " * scale
    return "\n".join(row.rstrip() for row in rows for _ in range(tall))


def scale_for(text: str, width: int) -> int:
    """The largest block size at which `text` fits in `width` columns (1 when nothing larger does)."""
    return next((s for s in SCALES if len(text) * 4 * s - s <= width), 1)


def phase_text(summary: dict, last_phase: str | None = None) -> str:
    """What the person at the stand is doing now: a flat seated after the surface checks the zero."""
    if summary.get("seatings_surface"):
        return "checking the zero on the flat (drift)" if last_phase == "flat" else "measuring the surface"
    if summary.get("seatings_flat"):
        return "zero set - seat the surface (or the flat again)"
    return "zeroing on the flat"


class LivePanel(RunStatus):
    """A rich panel, refreshed in place; use it as a context manager around the capture."""

    def __init__(self, unit: str, device: str = "", console: Console | None = None):
        super().__init__()
        self.unit = unit
        self.device = device
        self.console = console or Console()
        self._live = Live(self._render(), console=self.console, refresh_per_second=4, transient=False)
        self._last_draw = 0.0
        self._drawn: tuple = ()  # what the last drawing showed (see _shown)

    def __enter__(self):
        self._live.__enter__()
        return self

    def __exit__(self, *exc):
        self._live.update(self._render())
        return self._live.__exit__(*exc)

    def state(self, state) -> None:
        super().state(state)
        self._draw()

    def tick(self, t_s: float) -> None:
        if time.monotonic() - self._last_draw >= REDRAW_EVERY_S:
            self._draw()

    def next_tick_in_s(self) -> float | None:
        """Something new to show: a redraw when it is due; nothing new: no tick needed."""
        if self._shown() == self._drawn:
            return None
        return max(0.0, REDRAW_EVERY_S - (time.monotonic() - self._last_draw))

    def _shown(self) -> tuple:
        """What the panel shows comes from these."""
        return self.current, self.value_mm, self.summary, self.last_event

    def end(self, summary: dict) -> None:
        self.summary = summary
        self._draw()

    def _draw(self) -> None:
        self._last_draw = time.monotonic()
        self._drawn = self._shown()
        self._live.update(self._render())

    def _render(self):
        s, u = self.summary, self.unit
        radius = s.get("radius_mm")
        number = f"{from_mm(radius, u):.1f}" if radius is not None else "-"
        big = big_digits(number, scale_for(number, self.console.width - 4))  # inside the border and padding
        t = Table.grid(padding=(0, 2))
        t.add_column(style="bold")
        t.add_column()
        t.add_row("state", Text(str(self.current).upper(), style="reverse bold" if self.current == "seated" else "bold"))
        t.add_row("reading", length_text(self.value_mm, u, 4) if self.value_mm is not None else "-")
        t.add_row("phase", phase_text(s, self.last_phase))
        t.add_row("seatings", f"{s.get('seatings_flat', 0)} flat, {s.get('seatings_surface', 0)} surface, "
                              f"{s.get('seatings_rejected', 0)} rejected")
        t.add_row("last", self.last_event or "-")
        t.add_row("zero", length_text(s.get("zero_mm"), u, 4))
        sag_u = s.get("sagitta_u_mm")
        t.add_row("sagitta", length_text(s.get("sagitta_mm"), u, 5) + (f" +- {length_text(sag_u, u, 5)}" if sag_u else ""))
        U = s.get("radius_U_mm")
        t.add_row("radius", length_text(radius, u, 1) + (f" +- {length_text(U, u, 1)} (~95 %)" if U else ""))
        fr = s.get("focal_ratio")
        t.add_row("focal length", length_text(s.get("focal_length_mm"), u, 1) + (f"   f/{fr:.2f}" if fr else ""))
        if s.get("target_radius_mm") is not None:
            words, depth_words = to_go_words(s)
            t.add_row(words, f"radius {length_text(to_go(s, 'radius_to_go_mm'), u, 1)}, "
                             f"sagitta {length_text(to_go(s, 'sagitta_to_go_mm'), u, 5)} (as this spherometer reads)")
            if s.get("depth_to_go_mm") is not None:
                t.add_row(depth_words, f"{length_text(to_go(s, 'depth_to_go_mm'), u, 4)} +- "
                                       f"{length_text(s.get('depth_to_go_U_mm'), u, 4)} at the centre (sphere)")
        return Panel(Group(Text(big, style="bold"), Text(f"radius of curvature [{u}]"), t),
                     title=f"saglog  {self.device}", border_style="bold")
