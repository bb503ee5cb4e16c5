"""The SNR a loss costs behind a measured antenna-noise excess, with its uncertainty, and beside it
what the ITU-R P.372 medians would predict.

``rxbench predict --antenna-excess-db`` and a session (its measured loss and excess on a band)
call :func:`snr_cost`; the numerics are in :mod:`rxbench.dsp.environment`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from rxbench.dsp import environment as env
from rxbench.dsp.units import noise_temperature_from_nf_db
from rxbench.methods.common import COVERAGE_FACTOR, with_aliases
from rxbench.methods.external import p372_medians
from rxbench.style import band_name

#: A cost from the excess and one from the antenna through the DUT may differ by this beyond
#: their uncertainties before they are said to disagree, dB.
AGREEMENT_SLACK_DB = 0.05
#: Old key names (old -> new), kept for one release.
ALIASES = {"k": "coverage_factor", "antenna_excess_db": "excess_db", "rx_nf_db": "receiver_noise_figure_db"}


@dataclass(frozen=True, eq=False)
class SnrCostResult:
    """The SNR a loss costs at one frequency.

    Attributes
    ----------
    frequency_hz : float or None
    loss_db, u_loss_db, excess_db, u_excess_db : float
        The inputs (standard uncertainties).
    snr_degradation_db, u_db : float
        ΔSNR = 10*log10(1 + (L - 1)/X) and its standard uncertainty.
    through_dut_db, u_through_dut_db : float or None
        The cost from the antenna captured through the DUT: L minus the drop of its noise.
    receiver_noise_figure_db : float or None
    predicted : dict or None
        The cost ITU-R P.372's median environments would give with that noise figure.
    provenance : dict
        Where the loss came from (``loss_source``, ``loss_frequency_hz``); ``to_dict`` lists it beside
        the numbers.
    warnings : tuple of str
    """

    frequency_hz: float | None
    loss_db: float
    u_loss_db: float
    excess_db: float
    u_excess_db: float
    snr_degradation_db: float
    u_db: float
    through_dut_db: float | None = None
    u_through_dut_db: float | None = None
    receiver_noise_figure_db: float | None = None
    predicted: dict | None = None
    provenance: dict = field(default_factory=dict)
    warnings: tuple = ()

    @property
    def expanded_uncertainty_db(self) -> float:
        return COVERAGE_FACTOR * self.u_db

    @property
    def expanded_uncertainty_through_dut_db(self) -> float | None:
        return None if self.u_through_dut_db is None else COVERAGE_FACTOR * self.u_through_dut_db

    @property
    def band(self) -> str:
        """The amateur band of the frequency, or the frequency (:func:`rxbench.style.band_name`)."""
        return band_name(self.frequency_hz)

    @property
    def loss_source(self) -> str | None:
        """Where the loss came from (the provenance's ``loss_source``), when given."""
        return self.provenance.get("loss_source")

    def to_dict(self) -> dict:
        out = {
            "frequency_hz": self.frequency_hz, "loss_db": self.loss_db, "u_loss_db": self.u_loss_db,
            "excess_db": self.excess_db, "u_excess_db": self.u_excess_db,
            "snr_degradation_db": self.snr_degradation_db, "u_db": self.u_db,
            "expanded_uncertainty_db": self.expanded_uncertainty_db, "coverage_factor": COVERAGE_FACTOR,
            "snr_degradation_through_dut_db": self.through_dut_db,
            "expanded_uncertainty_through_dut_db": self.expanded_uncertainty_through_dut_db,
            "receiver_noise_figure_db": self.receiver_noise_figure_db, "predicted": self.predicted,
            **self.provenance, "warnings": list(self.warnings),
        }
        return with_aliases(out, ALIASES)


def snr_cost(loss_db: float, excess_db: float, *, u_loss_db: float = 0.0, u_excess_db: float = 0.0,
             frequency_hz: float | None = None, rx_nf_db: float | None = None, drop_db: float | None = None,
             u_drop_db: float = 0.0, provenance: dict | None = None) -> SnrCostResult:
    """The SNR ``loss_db`` costs behind an antenna-noise excess of ``excess_db`` (both measured).

    With ``drop_db`` (how far the antenna noise fell with the DUT in the path) also the cost
    measured directly, L - drop, with no noise model; with ``rx_nf_db`` and a frequency in
    ITU-R P.372's range, the costs its median environments predict.
    """
    warnings = []
    if loss_db < 0:
        warnings.append(f"the measured loss is {loss_db:.2f} dB (below 0); cost taken at 0 dB")
    cost, u = env.snr_cost_from_excess_db(loss_db, excess_db, u_loss_db, u_excess_db)
    direct = u_direct = None
    if drop_db is not None:
        # SNR through the DUT over SNR without it: L * N_dut / N_antenna (noise densities at the
        # dongle), so the cost is L - drop, with no model of the noise needed.
        direct, u_direct = loss_db - drop_db, math.hypot(u_loss_db, u_drop_db)
        if abs(direct - cost) > COVERAGE_FACTOR * math.hypot(u, u_direct) + AGREEMENT_SLACK_DB:
            warnings.append(f"the cost from the excess ({cost:.2f} dB) and from the antenna through the DUT "
                            f"({direct:.2f} dB) disagree; check that the band noise was steady between the captures")
    predicted = None
    medians = p372_medians(frequency_hz)
    if rx_nf_db is not None and medians:
        trx = noise_temperature_from_nf_db(rx_nf_db)
        predicted = {k: float(env.snr_degradation_db(max(loss_db, 0.0), env.temperature_from_fa_db(fa), trx))
                     for k, fa in medians.items()}
    return SnrCostResult(frequency_hz, float(loss_db), float(u_loss_db), float(excess_db), float(u_excess_db),
                         cost, u, direct, u_direct, rx_nf_db, predicted, dict(provenance or {}), tuple(warnings))
