"""``rxbench inspect CAPTURE``: tone power, frequency, noise density, C/N0, SNR and health of one capture."""

from __future__ import annotations

import argparse
import sys

from rxbench.options import add_noise_band_option
from rxbench.reading import health_dict, noise_dict, read_capture, tone_dict, tone_shape
from rxbench.style import fmt_hz, fmt_hz_band
from rxbench.output import Progress, add_json_option, emit, fmt_db
from rxbench.recordings import add_capture_options, capture_from_args
from rxbench.dsp.tone import DEFAULT_SNR_BANDWIDTH_HZ
from rxbench.dsp.units import db_from_power
from rxbench.quantities import arg as quantity_arg


def add_parser(sub) -> None:
    p = sub.add_parser("inspect", help="read a tone and the noise from one capture",
                       description="Read the tone and the noise floor of one capture.")
    p.add_argument("capture", metavar="CAPTURE", help="SigMF (.sigmf-meta/.sigmf-data), raw IQ, or WAV/FLAC file")
    p.add_argument("--near", type=quantity_arg("offset"), metavar="HZ", help="measure the tone near this offset from centre, Hz")
    p.add_argument("--snr-bandwidth", type=quantity_arg("bandwidth"), default=DEFAULT_SNR_BANDWIDTH_HZ, metavar="HZ",
                   help="noise bandwidth for the SNR, Hz (default %(default)g)")
    add_noise_band_option(p)
    p.add_argument("--nperseg", type=int, metavar="N", help="FFT segment length (default 4096, shorter for short captures)")
    add_capture_options(p)
    add_json_option(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    if args.snr_bandwidth <= 0:
        from rxbench.errors import UsageError

        raise UsageError(f"--snr-bandwidth must be positive, got {args.snr_bandwidth}")
    cap = capture_from_args(args.capture, args)
    show = Progress(sys.stderr)
    r = read_capture(cap, near_hz=args.near, nperseg=args.nperseg, snr_bandwidth_hz=args.snr_bandwidth,
                     noise_band_hz=args.noise_band, progress=lambda done, total: show.update(f"reading {cap.name}", done, total))
    show.clear()
    t = r.tone
    result = {
        "capture": str(cap.path),
        "sample_rate_hz": cap.sample_rate_hz,
        "center_hz": cap.center_hz,
        "n_samples": cap.n_samples,
        "duration_s": cap.duration_s,
        "tone": tone_dict(t, cap.center_hz),
        "noise": noise_dict(r),
        "spectrum": {"nperseg": r.psd.nperseg, "bin_width_hz": r.psd.bin_width_hz, "enbw_hz": r.psd.enbw_hz,
                     "segments": r.psd.n_segments, "dof": r.psd.dof},
        **health_dict(r.health),  # clip_fraction, clip_count, peak_magnitude
        "dc_offset_dbfs": r.health.dc_offset_dbfs,
        "mean_power_dbfs": db_from_power(r.health.power),
        "warnings": r.warnings,
    }
    lines = [f"{cap.path}: {cap.n_samples} samples at {fmt_hz(cap.sample_rate_hz, 1.0)} ({cap.duration_s:.3g} s)"]
    if t is None:
        lines.append("  tone          none found above the noise")
    else:
        freq = "" if cap.center_hz is None else f"  ({fmt_hz_band(cap.center_hz + t.offset_hz, 1.0)})"
        lo, hi = t.ci95_dbfs
        shape = tone_shape(r.psd, r.floor, t)  # the findings the reading's warnings come from
        on = shape.on_fraction
        basis = "  averaged over the whole capture" if on is not None or shape.varies_within_slots else ""
        lines += [
            f"  tone          {t.offset_hz:+.1f} Hz{freq}",
            f"  power         {fmt_db(t.power_dbfs)} dBFS  (95 %: {fmt_db(lo, 3)} .. {fmt_db(hi, 3)}){basis}",
        ]
        if on is not None:
            lines.append(f"  while on      {fmt_db(t.on_power_dbfs)} dBFS, present {100 * on:.0f} % of the time"
                         f" (C/N0 {fmt_db(t.on_cn0_dbhz, 1)} dB-Hz while on)")
        elif shape.varies_within_slots:
            lines.append(f"  while on      not resolved: keyed faster than the {1e3 * t.timeline.slot_s:.3g} ms time slots")
        lines += [
            f"  C/N0          {fmt_db(t.cn0_dbhz, 1)} dB-Hz",
            f"  SNR           {fmt_db(t.snr_db, 1)} dB in {fmt_hz(t.snr_bandwidth_hz)}",
            f"  width         {fmt_hz(t.width_hz)} at -3 dB (a line: {fmt_hz(t.line_width_hz)})",
        ]
    lines += [
        f"  noise         {fmt_db(result['noise']['density_dbfs_per_hz'])} dBFS/Hz  (moves "
        f"{r.floor.time_range_db:.2g} dB in time, {r.floor.band_range_db:.2g} dB across the band)",
        f"  clipped       {100 * r.health.clip_fraction:.4g} % of samples ({r.health.n_clipped} at a rail);"
        f" peak magnitude {r.health.peak_magnitude:.4g} ({fmt_db(r.health.peak_dbfs, 1)} dBFS)",
        f"  DC offset     {fmt_db(r.health.dc_offset_dbfs, 1)} dBFS",
    ]
    emit(args, result, "\n".join(lines), r.warnings)
    return 0
