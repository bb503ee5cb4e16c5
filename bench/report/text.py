"""Numbers as the report prints them, and the summary lines of a session."""

from __future__ import annotations

import math
import tomllib

from rxbench.output import fmt_db
from rxbench.session import Analysis
from rxbench.style import fmt_hz


def _pm(value, u, digits=2, unit="dB") -> str:
    """``value ± u`` in dB; a third decimal when the uncertainty would otherwise print as 0.0x."""
    if value is None:
        return "n/a"
    if u is None or not math.isfinite(u):
        return f"{fmt_db(value, digits)} {unit}"
    if u < 0.05:
        digits = max(digits, 3)
    return f"{fmt_db(value, digits)} ± {u:.{digits}f} {unit}"


def _mhz(f) -> str:
    """A frequency in the number style (:func:`bench.style.fmt_hz`)."""
    return fmt_hz(f)


def plan_title(analysis: Analysis) -> str:
    """The plan's title, read as data from the session's copy of the plan ('' when none)."""
    p = analysis.session.plan_path
    if p is None:
        return ""
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, RecursionError, tomllib.TOMLDecodeError):
        return ""
    title = data.get("title")
    return title if isinstance(title, str) else ""


def summary_lines(analysis: Analysis) -> list[str]:
    """A few lines with the headline numbers (expanded uncertainties U, k = 2), each carrying its own
    caveats (:mod:`bench.caveats`)."""
    from rxbench.caveats import clip_fractions, headline_tags

    clips = clip_fractions(analysis)
    lines = []
    for x in analysis.losses:
        per = ""
        if x.n_devices > 1:
            per = f"; per device {_pm(x.per_device_db, x.expanded_uncertainty_per_device_db)}"
        linear = x.dongle_linear if x.method == "direct" else True
        tags = headline_tags(x.to_dict(), clips, linear=linear)
        lines.append(f"insertion loss ({x.method}, device at {x.dut_attenuation_db:g} dB) at "
                     f"{_mhz(x.frequency_hz)}: {_pm(x.insertion_loss_db, x.expanded_uncertainty_db)}{per}"
                     f"{tags}")
    for lad in analysis.ladders:
        c = lad.check
        text = (f"ladder at {_mhz(lad.center_hz)}: {len(c.nominal_db)} steps, dongle linear from "
                f"{c.usable_top_db:g} to {c.usable_bottom_db:g} dB")
        if c.compression_db > 0:
            text += f", compressed {c.compression_db:.2f} dB at the top"
        if c.flagged.any():
            text += "; off: " + ", ".join(f"{db:g} dB ({err:+.2f} dB)"
                                          for db, err, f in zip(c.nominal_db, c.error_db, c.flagged) if f)
        lines.append(text)
    for n in analysis.noise_figure:
        text = f"noise figure (receiver) at {_mhz(n.center_hz)}: {_pm(n.noise_figure_db, n.expanded_uncertainty_db)}"
        if n.has_dut:
            text += f"; {n.device or 'DUT'} loss over the band {_pm(n.insertion_loss_db, n.expanded_uncertainty_loss_db)}"
        lines.append(text + headline_tags({"captures": n.captures}, clips))
    for ex in analysis.external_noise:
        lines.append(f"band noise on {ex.band} ({_mhz(ex.frequency_hz)}): "
                     f"{_pm(ex.excess_db, ex.expanded_uncertainty_db)} above the receiver's own")
    for c in analysis.snr_cost:
        text = (f"SNR cost on {c.band} ({_mhz(c.frequency_hz)}): "
                f"{_pm(c.snr_degradation_db, c.expanded_uncertainty_db)} for a loss of {c.loss_db:.2f} dB")
        if c.through_dut_db is not None:
            text += (f" (antenna through the device: "
                     f"{_pm(c.through_dut_db, c.expanded_uncertainty_through_dut_db)})")
        lines.append(text)
    if not lines:
        lines.append("no measurement could be made from these captures (see the warnings)")
    return lines


def _table(header: list[str], rows: list[list]) -> str:
    out = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    for r in rows:
        out.append("| " + " | ".join(str(c) for c in r) + " |")
    return "\n".join(out)


def _f(v, d=2) -> str:
    return "n/a" if v is None else fmt_db(v, d)
