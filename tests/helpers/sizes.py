"""How long the functions and modules of a package are (the ast module's line numbers).

A function counts from its `def` line to its last line, docstring and nested
functions included; a module counts all its lines.  Run it to list the
longest: `python -m tests.helpers.sizes [FOLDER] [--all]` (default: logger/).
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

from tests.helpers.paths import ROOT

MAX_FUNCTION_LINES = 80
MAX_MODULE_LINES = 400


def module_lines(root: Path = ROOT / "logger") -> list[tuple[int, str]]:
    """(lines, path) of every module below `root`, longest first."""
    rows = [(len(p.read_text(encoding="utf-8").splitlines()), str(p.relative_to(root.parent))) for p in root.rglob("*.py")]
    return sorted(rows, reverse=True)


def function_lines(root: Path = ROOT / "logger") -> list[tuple[int, str]]:
    """(lines, path:line name) of every function and method below `root`, longest first."""
    rows = []
    for p in root.rglob("*.py"):
        for node in ast.walk(ast.parse(p.read_text(encoding="utf-8"), str(p))):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                rows.append((node.end_lineno - node.lineno + 1, f"{p.relative_to(root.parent)}:{node.lineno} {node.name}"))
    return sorted(rows, reverse=True)


def too_long(root: Path = ROOT / "logger") -> list[str]:
    """Every function over MAX_FUNCTION_LINES and module over MAX_MODULE_LINES, as 'N lines: where'."""
    return ([f"{n} lines: function {where}" for n, where in function_lines(root) if n > MAX_FUNCTION_LINES]
            + [f"{n} lines: module {where}" for n, where in module_lines(root) if n > MAX_MODULE_LINES])


def main(argv: list[str]) -> int:
    args = [a for a in argv if a != "--all"]
    root = Path(args[0]).resolve() if args else ROOT / "logger"
    shown = 10**9 if "--all" in argv else 10
    print(f"limits: {MAX_FUNCTION_LINES} lines a function, {MAX_MODULE_LINES} a module")
    for title, rows in (("functions", function_lines(root)), ("modules", module_lines(root))):
        print(f"longest {title}:")
        for n, where in rows[:shown]:
            print(f"  {n:4d}  {where}")
    over = too_long(root)
    print("\n".join(over) if over else "none over the limits")
    return 1 if over else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
