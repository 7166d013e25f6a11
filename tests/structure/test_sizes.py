"""Short functions and modules: none in logger/ over 80 lines a function or 400 a module.

`python -m tests.helpers.sizes` lists the longest, to see what is close.
"""

from __future__ import annotations

from tests.helpers.paths import ROOT
from tests.helpers.sizes import MAX_FUNCTION_LINES, MAX_MODULE_LINES, function_lines, module_lines, too_long


def test_no_function_or_module_in_logger_is_too_long():
    assert len(module_lines(ROOT / "logger")) > 40  # the whole package was looked at
    assert too_long(ROOT / "logger") == []


def test_the_measure_counts_what_it_says(tmp_path):
    # a module written here: a function of exactly the limit, a method one line over it, one line too many in all
    src = ("def fits():\n" + "    x = 1\n" * (MAX_FUNCTION_LINES - 1)
           + "\n\nclass C:\n    def over(self):\n" + "        x = 1\n" * MAX_FUNCTION_LINES)
    src += "\n" * (MAX_MODULE_LINES + 1 - len(src.splitlines()))
    (tmp_path / "pkg").mkdir()
    (tmp_path / "pkg" / "m.py").write_text(src)
    over_at = MAX_FUNCTION_LINES + 4  # after `fits`, two blank lines and `class C:`
    assert function_lines(tmp_path / "pkg") == [(MAX_FUNCTION_LINES + 1, f"pkg/m.py:{over_at} over"),
                                                  (MAX_FUNCTION_LINES, "pkg/m.py:1 fits")]
    assert module_lines(tmp_path / "pkg") == [(MAX_MODULE_LINES + 1, "pkg/m.py")]
    assert too_long(tmp_path / "pkg") == [f"{MAX_FUNCTION_LINES + 1} lines: function pkg/m.py:{over_at} over",
                                          f"{MAX_MODULE_LINES + 1} lines: module pkg/m.py"]
