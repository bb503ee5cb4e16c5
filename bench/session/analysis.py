"""The whole analysis of a session: every capture read once, every method its roles support."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from rxbench.reading import Reading, health_dict, noise_dict, read_capture, tone_dict
from rxbench.errors import RxbenchError
from rxbench.dsp.same_signal import DEFAULT_PPM
from rxbench.methods.common import COVERAGE_FACTOR, N_SUB_BANDS
from rxbench.methods.loss import LossResult
from rxbench.session.folder import TONE_ROLES, Entry, Session
from rxbench.session.external import _external, _snr_costs
from rxbench.session.grouping import _center_key, _groups
from rxbench.session.gain import _gain_methods
from rxbench.session.noise_source import _curves, _noise_source
from rxbench.session.tone import _tone_losses





@dataclass
class Analysis:
    """Everything a session supports. ``to_dict()`` is the JSON view; ``readings`` feed the plots."""

    session: Session
    readings: dict = field(default_factory=dict)  # Entry -> Reading
    captures: list = field(default_factory=list)
    ladders: list = field(default_factory=list)  # LadderResult
    losses: list = field(default_factory=list)  # LossResult
    noise_figure: list = field(default_factory=list)  # NoiseSourceBand per tuning (and device)
    noise_source: list = field(default_factory=list)  # NoiseFigureResult per device over every tuning
    gain_method: list = field(default_factory=list)  # GainMethodResult per thru capture of known level
    loss_vs_frequency: dict | None = None
    devices: dict = field(default_factory=dict)  # device label -> stitched curve (several devices compared)
    per_band: list = field(default_factory=list)  # loss per amateur band, per device (bench.sweep_report)
    per_band_noise_figure: list = field(default_factory=list)
    device_differences: list = field(default_factory=list)
    retune_steps: list = field(default_factory=list)
    external_noise: list = field(default_factory=list)
    snr_cost: list = field(default_factory=list)
    warnings: list = field(default_factory=list)
    settings: dict = field(default_factory=dict)  # how the captures were read (noise band, drift tolerance)

    def best_loss(self, center_hz=None) -> LossResult | None:
        """The tone-based loss with the smallest expanded uncertainty (at ``center_hz`` if given)."""
        cands = [x for x in self.losses
                 if center_hz is None or _center_key(x.center_hz) == _center_key(center_hz)]
        return min(cands, key=lambda x: x.expanded_uncertainty_db, default=None)

    def summary(self) -> dict:
        best = self.best_loss()
        out = {
            "insertion_loss_db": None if best is None else best.insertion_loss_db,
            "expanded_uncertainty_db": None if best is None else best.expanded_uncertainty_db,
            "method": None if best is None else best.method,
            "per_device_db": None if best is None else best.per_device_db,
            "frequency_hz": None if best is None else best.frequency_hz,
        }
        nfs = [n for n in self.noise_figure if math.isfinite(n.noise_figure_db)]
        if nfs:
            n = min(nfs, key=lambda v: v.expanded_uncertainty_db)
            out["noise_figure_db"] = n.noise_figure_db
            out["noise_figure_expanded_uncertainty_db"] = n.expanded_uncertainty_db
        out["snr_cost"] = [{"band": c.band, "frequency_hz": c.frequency_hz, "snr_degradation_db": c.snr_degradation_db,
                            "expanded_uncertainty_db": c.expanded_uncertainty_db} for c in self.snr_cost]
        return out

    def to_dict(self) -> dict:
        s = self.session
        return {
            "session": str(s.folder),
            "plan": None if s.plan_path is None else s.plan_path.name,
            "n_captures": len(s.entries),
            "summary": self.summary(),
            "captures": self.captures,
            "incomplete": [p.name for p in s.incomplete],
            "skipped": [{"file": p.name, "reason": why} for p, why in s.skipped],
            "ladder": [x.to_dict() for x in self.ladders],
            "losses": [x.to_dict() for x in self.losses],
            "noise_figure": [x.to_dict() for x in self.noise_figure],
            "gain_method": [x.to_dict() for x in self.gain_method],
            "loss_vs_frequency": self.loss_vs_frequency,
            "devices": self.devices,
            "per_band": self.per_band,
            "per_band_noise_figure": self.per_band_noise_figure,
            "device_differences": self.device_differences,
            "retune_steps": self.retune_steps,
            "external_noise": [{**x.to_dict(), "band": x.band} for x in self.external_noise],
            "snr_cost": [{**x.to_dict(), "band": x.band} for x in self.snr_cost],
            "coverage_factor": COVERAGE_FACTOR,
            "settings": self.settings,
            "warnings": self.warnings,
        }


def _capture_dict(e: Entry, r: Reading | None, error: str | None) -> dict:
    cap = e.capture
    out = {
        "name": e.name, "file": cap.path.name, "role": e.role, "step": e.step,
        "attenuation_db": e.attenuation_db, "gain_db": e.gain_db, "through_dut": e.through_dut,
        "center_hz": cap.center_hz, "sample_rate_hz": cap.sample_rate_hz, "duration_s": cap.duration_s,
        "datetime": cap.datetime, "error": error,
    }
    if r is not None:
        out.update({
            "tone": tone_dict(r.tone, cap.center_hz) if e.role in TONE_ROLES else None,
            "noise": noise_dict(r),
            **health_dict(r.health), "warnings": list(r.warnings),
        })
    return out


def analyze_session(session: Session, *, n_sub_bands: int = N_SUB_BANDS, drift_ppm: float = DEFAULT_PPM,
                    noise_band_hz: tuple[float, float] | None = None, progress=None) -> Analysis:
    """Read every capture of ``session`` once and run every method its roles support.

    Parameters
    ----------
    session : Session
    n_sub_bands : int
        Sub-bands per tuning for the noise-source curves.
    drift_ppm : float
        How far the tone may move between captures of one loss or ladder, ppm of the centre frequency
        on top of 3 bins; a capture whose tone lies farther off is left out with a warning.
    noise_band_hz : (float, float), optional
        Take every capture's noise floor between these offsets from centre, Hz (as ``--noise-band``).
    progress : callable, optional
        Called as ``progress(i, n, name)`` before each capture is read.

    Returns
    -------
    Analysis
    """
    a = Analysis(session, settings={"n_sub_bands": n_sub_bands, "drift_ppm": drift_ppm,
                                    "noise_band_hz": None if noise_band_hz is None else sorted(noise_band_hz)})
    a.warnings.extend(session.warnings)
    for e in session.entries:
        if e.dropped_samples:
            a.warnings.append(f"{e.name}: {e.dropped_samples} samples were dropped while capturing; the "
                              "recording has gaps (its readings are used, but capture it again if they matter)")
    n = len(session.entries)
    for i, e in enumerate(session.entries):
        if progress is not None:
            progress(i, n, e.name)
        try:
            r = read_capture(e.capture, want_tone=e.role in TONE_ROLES, near_hz=e.tone_offset_hz,
                             noise_band_hz=noise_band_hz)
        except RxbenchError as exc:
            a.warnings.append(f"{e.name}: {exc}; skipped")
            a.captures.append(_capture_dict(e, None, str(exc)))
            continue
        a.readings[e] = r
        a.warnings.extend(r.warnings)
        a.captures.append(_capture_dict(e, r, None))
    readable = [e for e in session.entries if e in a.readings]

    for center, group in _groups(readable, TONE_ROLES).items():
        _tone_losses(center, group, a.readings, a, drift_ppm)
    bands = []
    for center, group in _groups(readable, ("hot", "cold")).items():
        # several devices at one centre: each against the same reference captures
        labels = sorted({e.device for e in group if e.through_dut}) or [""]
        for label in labels:
            part = [e for e in group if not e.through_dut or e.device == label]
            band = _noise_source(center, part, a.readings, a, n_sub_bands)
            if band is not None:
                bands.append((label, band))
    bands.sort(key=lambda lb: (lb[1].center_hz is None, lb[1].center_hz or 0.0))
    a.noise_figure = [b for _, b in bands]
    a.noise_source = _curves(bands, a) if bands else []
    from rxbench.sweep_report import analyse_bands

    analyse_bands(a)
    for center, group in _groups(readable, ("antenna", "load")).items():
        res = _external(center, group, a.readings, a)
        if res is not None:
            a.external_noise.append(res)
    a.external_noise.sort(key=lambda x: (x.center_hz is None, x.center_hz or 0.0))
    a.gain_method = _gain_methods(readable, a.readings, a)
    _snr_costs(a)
    # A warning said twice (by two methods reading one capture) is said once.
    a.warnings = list(dict.fromkeys(a.warnings))
    return a
