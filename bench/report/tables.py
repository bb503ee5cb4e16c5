"""``results.csv``: one row per reported number."""

from __future__ import annotations

import csv
from pathlib import Path

from rxbench.methods.common import COVERAGE_FACTOR
from rxbench.session import Analysis


def csv_rows(analysis: Analysis) -> list[dict]:
    """One row per reported number: section, quantity, frequency, value, unit, expanded uncertainty."""
    rows = []

    def add(section, quantity, frequency_hz, value, unit, expanded=None, method="", detail=""):
        rows.append({"section": section, "quantity": quantity, "frequency_hz": frequency_hz,
                     "value": value, "unit": unit, "expanded_uncertainty": expanded,
                     "k": COVERAGE_FACTOR if expanded is not None else None, "method": method, "detail": detail})

    for c in analysis.captures:
        t = c.get("tone")
        if t and t.get("power_dbfs") is not None:
            u = t.get("u_power_db")
            add("capture", "tone_power", t.get("frequency_hz"), t["power_dbfs"], "dBFS",
                None if u is None else COVERAGE_FACTOR * u, "tone", c["name"])
        if c.get("noise"):
            add("capture", "noise_density", c["center_hz"], c["noise"]["density_dbfs_per_hz"], "dBFS/Hz",
                COVERAGE_FACTOR * c["noise"]["u_density_db"], "", c["name"])
    for x in analysis.losses:
        add("loss", "insertion_loss", x.frequency_hz, x.insertion_loss_db, "dB", x.expanded_uncertainty_db, x.method)
        if x.n_devices > 1:
            add("loss", "insertion_loss_per_device", x.frequency_hz, x.per_device_db, "dB",
                x.expanded_uncertainty_per_device_db, x.method)
    for lad in analysis.ladders:
        c = lad.check
        for i, db in enumerate(c.nominal_db):
            add("ladder", "step_error", lad.frequency_hz, float(c.error_db[i]), "dB", float(c.k * c.u_error_db[i]),
                c.region[i], f"nominal {db:g} dB" + (" FLAGGED" if c.flagged[i] else ""))
    for n in analysis.noise_figure:
        add("noise_figure", "receiver_noise_figure", n.center_hz, n.noise_figure_db, "dB",
            n.expanded_uncertainty_db, "y-factor", "whole band")
        if n.has_dut:
            add("noise_figure", "insertion_loss", n.center_hz, n.insertion_loss_db, "dB",
                n.expanded_uncertainty_loss_db, "noise source", "whole band")
    curve = analysis.loss_vs_frequency
    if curve is not None:
        for i, f in enumerate(curve["frequency_hz"]):
            add("vs_frequency", "receiver_noise_figure", f, curve["noise_figure_db"][i], "dB",
                COVERAGE_FACTOR * curve["u_noise_figure_db"][i], "y-factor", "sub-band")
            if curve["insertion_loss_db"][i] is not None:
                add("vs_frequency", "insertion_loss", f, curve["insertion_loss_db"][i], "dB",
                    COVERAGE_FACTOR * curve["u_insertion_loss_db"][i], "noise source", "sub-band")
            if curve["dut_noise_figure_db"][i] is not None:  # None where F1 <= 0: no noise figure there
                add("vs_frequency", "dut_noise_figure", f, curve["dut_noise_figure_db"][i], "dB",
                    COVERAGE_FACTOR * curve["u_dut_noise_figure_db"][i], "noise source", "sub-band")
    for ex in analysis.external_noise:
        add("external_noise", "excess", ex.frequency_hz, ex.excess_db, "dB", ex.expanded_uncertainty_db,
            "antenna/load", ex.band)
        if ex.fa_db is not None:
            add("external_noise", "fa", ex.frequency_hz, ex.fa_db, "dB", None, "from excess and NF", ex.band)
    for c in analysis.snr_cost:
        add("snr_cost", "snr_degradation", c.frequency_hz, c.snr_degradation_db, "dB",
            c.expanded_uncertainty_db, "from loss and excess", c.band)
        if c.through_dut_db is not None:
            add("snr_cost", "snr_degradation", c.frequency_hz, c.through_dut_db, "dB",
                c.expanded_uncertainty_through_dut_db, "antenna through the device", c.band)
        for env, v in (c.predicted or {}).items():
            add("snr_cost", "snr_degradation_predicted", c.frequency_hz, v, "dB", None, f"ITU-R P.372 {env}",
                c.band)
    return rows


def write_csv(rows: list[dict], path: Path) -> None:
    fields = ["section", "quantity", "frequency_hz", "value", "unit", "expanded_uncertainty", "k", "method", "detail"]
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.DictWriter(f, fieldnames=fields)
        w.writeheader()
        for r in rows:
            w.writerow({k: ("" if r[k] is None else (f"{r[k]:.6g}" if isinstance(r[k], float) else r[k]))
                        for k in fields})
