"""Output conventions: JSON cleaning and progress display."""

import io
import math

import numpy as np

from rxbench.output import Progress, json_safe, fmt_db


class _Tty(io.StringIO):
    def isatty(self):
        return True


def test_progress_updates_only_on_a_terminal():
    tty, pipe = _Tty(), io.StringIO()
    for stream in (tty, pipe):
        p = Progress(stream)
        p.update("reading x", 50, 200)
        p.finish("x", "done")
    assert "25.0 %" in tty.getvalue() and tty.getvalue().endswith("x: done\n")
    assert pipe.getvalue() == "x: done\n"  # a log or pipe gets plain lines only
    Progress(None).update("quiet", 1, 2)  # no stream: silent


def test_json_cleaning_makes_strict_json():
    doc = json_safe({"a": np.float64(1.5), "b": [np.inf, -np.inf, math.nan], "c": np.arange(2)})
    assert doc == {"a": 1.5, "b": [None, None, None], "c": [0, 1]}


def test_db_formatting_spells_out_non_finite():
    assert fmt_db(-math.inf) == "-inf" and fmt_db(math.nan) == "n/a" and fmt_db(1.234) == "1.23"
