"""Units at the edges: millimetres inside the program, inches only on the way in or out."""

from logger.errors import UserError

MM_PER_INCH = 25.4  # exact, by definition (international inch, 1959)

UNITS = ("mm", "in")


def check_unit(unit: str, where: str) -> str:
    """Return the canonical unit name or raise a UserError naming `where`."""
    u = str(unit).strip().lower()
    if u in ("mm", "millimetre", "millimeter"):
        return "mm"
    if u in ("in", "inch", '"'):
        return "in"
    raise UserError(f"{where}: unknown unit {unit!r} (use \"mm\" or \"in\")")


def to_mm(value: float, unit: str) -> float:
    return value * MM_PER_INCH if unit == "in" else value


def from_mm(value_mm: float, unit: str) -> float:
    return value_mm / MM_PER_INCH if unit == "in" else value_mm
