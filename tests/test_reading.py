"""Small shared helpers of rxbench.reading: the start time of a capture and pooled tone readings."""

from __future__ import annotations

import math
from pathlib import Path
from types import SimpleNamespace

import pytest

from rxbench.reading import capture_start_s, pool_tones, tone_db
from rxbench.errors import MeasurementError
from rxbench.dsp.loss import mean_reading


def _cap(datetime):
    return SimpleNamespace(datetime=datetime, path=Path("x.sigmf-meta"))


def test_capture_start_reads_iso_8601_as_utc():
    # ISO 8601 (common practice): "Z" is UTC, and a time that names no zone is taken as UTC;
    # 2026-03-01T10:00:00Z is 1772359200 s after the epoch (from datetime's own arithmetic).
    assert capture_start_s(_cap("2026-03-01T10:00:00Z")) == 1772359200.0
    assert capture_start_s(_cap("2026-03-01T10:00:00")) == 1772359200.0
    assert capture_start_s(_cap("2026-03-01T11:00:00+01:00")) == 1772359200.0
    for bad in (None, "", "yesterday", 12):
        assert capture_start_s(_cap(bad)) is None


def _reading(power_dbfs, u_db, dof, name="x"):
    tone = None if power_dbfs is None else SimpleNamespace(power=10 ** (power_dbfs / 10), power_dbfs=power_dbfs,
                                                           u_power_db=u_db, dof_u=dof)
    return SimpleNamespace(tone=tone, capture=SimpleNamespace(path=Path(f"{name}.sigmf-meta")))


def test_pool_tones_is_mean_reading_of_the_tones():
    rs = [_reading(-30.0, 0.02, 50.0), _reading(-30.1, 0.03, 40.0), _reading(-29.95, 0.02, 60.0)]
    assert pool_tones(rs) == mean_reading([-30.0, -30.1, -29.95], [0.02, 0.03, 0.02], [50.0, 40.0, 60.0])
    p, u, dof = tone_db(_reading(None, 0, 0))  # no tone: nothing to pool
    assert math.isnan(p) and math.isnan(u) and dof == math.inf
    with pytest.raises(MeasurementError, match="gone.sigmf-meta: no thru tone"):
        pool_tones([rs[0], _reading(None, 0, 0, "gone")], "thru")
