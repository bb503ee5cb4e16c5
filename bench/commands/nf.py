"""``rxbench nf``: the receive system's noise figure from a noise source (Y-factor) or a tone of known
level (gain method), and a DUT's insertion loss and noise figure across frequency from the noise
source with and without the DUT in the path. Captures at several centre frequencies are stitched
into one curve."""

from __future__ import annotations

import argparse
import csv
import io
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from rxbench.reading import (accumulate, add_noise_band_option, choose_nperseg, health_warnings, read_capture,
                             require_same_signal)
from rxbench.enr import read_enr_table
from rxbench.files import check_output
from rxbench.errors import MeasurementError, UsageError
from rxbench.style import fmt_hz_band
from rxbench.output import add_json_option, emit, fmt_db
from rxbench.recordings import Capture, add_capture_options, atomic_path, capture_from_args
from rxbench.dsp import noisefig as nfm
from rxbench.methods.common import COVERAGE_FACTOR
from rxbench.dsp.units import T0_K, db_from_power
from rxbench.quantities import arg as quantity_arg

#: Coverage factor of the expanded uncertainties printed (about 95 %), defined once.
K_EXPANDED = COVERAGE_FACTOR
#: Warn when one dB of error in Y moves the noise figure by more than this many dB.
Y_SENSITIVITY_WARN = 2.0
#: Warn when an expanded uncertainty (dB) exceeds this.
U_WARN_DB = 0.5
#: A tone level above this (dBm at the dongle) gets a compression/damage caution.
LEVEL_CAUTION_DBM = -30.0

DESCRIPTION = """\
Noise figure of the receive system by the Y-factor method: capture a noise source switched on
(--hot) and off (--cold), with its ENR given as a number or a table against frequency. With the
same pair captured through a device (--hot-dut, --cold-dut), also the device's insertion loss and
noise figure across the captured band. Repeat --hot/--cold (and the DUT pair) for captures at
several centre frequencies (taken from their metadata) to get one stitched curve; repeated
captures at one centre frequency are pooled. With --tone and
--level-dbm, the noise figure by the gain method: NF = P_in - C/N0 - kT0.
Keep the dongle's gain fixed (AGC off) for every capture of a pair."""


def add_parser(subparsers) -> None:
    p = subparsers.add_parser("nf", help="noise figure, and a DUT's loss across frequency, from a noise source",
                              description=DESCRIPTION)
    p.add_argument("--hot", action="append", default=[], metavar="CAPTURE",
                   help="capture with the noise source on (repeat: several centre frequencies, or repeats to pool)")
    p.add_argument("--cold", action="append", default=[], metavar="CAPTURE",
                   help="capture with the noise source off")
    p.add_argument("--hot-dut", action="append", default=[], metavar="CAPTURE",
                   help="source on, DUT between source and dongle")
    p.add_argument("--cold-dut", action="append", default=[], metavar="CAPTURE",
                   help="source off, DUT between source and dongle")
    enr = p.add_mutually_exclusive_group()
    enr.add_argument("--enr-db", type=quantity_arg("enr_db"), metavar="DB", help="ENR of the noise source, dB")
    enr.add_argument("--enr-table", metavar="CSV", help="ENR table: lines of frequency_hz,enr_db")
    p.add_argument("--enr-u-db", type=quantity_arg("tolerance_db"), default=0.0, metavar="DB",
                   help="standard uncertainty of the ENR, dB (default 0: not included)")
    p.add_argument("--cold-k", type=quantity_arg("temperature_k"), default=T0_K, metavar="K",
                   help="physical temperature of the source when off, K (default %(default)g)")
    p.add_argument("--tone", metavar="CAPTURE", help="capture of a tone of known level (gain method)")
    p.add_argument("--level-dbm", type=quantity_arg("level_dbm"), metavar="DBM", help="level of that tone at the dongle's input, dBm")
    p.add_argument("--sub-bands", type=int, default=16, metavar="N",
                   help="sub-bands across each capture's usable band (default %(default)d)")
    p.add_argument("--nperseg", type=int, metavar="N", help="FFT segment length (default 4096, shorter for short captures)")
    add_noise_band_option(p)  # the gain method's noise density (the Y-factor uses band powers)
    p.add_argument("--csv", metavar="FILE", help="write the curve (NF and loss against frequency) to this CSV file")
    p.add_argument("--overwrite", action="store_true", help="replace an existing --csv file")
    add_capture_options(p)
    add_json_option(p)
    p.set_defaults(func=run)


# ------------------------------------------------------------------------------------------ input


#: The capture options, in the order they are opened (and named in errors).
OPTIONS = ("hot", "cold", "hot_dut", "cold_dut")
#: The same, in the order the noise-source analysis takes them.
ROLES = ("cold", "hot", "cold_dut", "hot_dut")


@dataclass
class _Group:
    """The captures taken at one centre frequency (repeats of a role are pooled)."""

    center_hz: float | None
    hot: list[Capture]
    cold: list[Capture]
    hot_dut: list[Capture]
    cold_dut: list[Capture]

    @property
    def captures(self) -> list[tuple[str, Capture]]:
        return [(role.replace("_", "-"), c) for role in ROLES for c in getattr(self, role)]


def _validate(args) -> None:
    if bool(args.hot) != bool(args.cold):
        raise UsageError("give both --hot and --cold (at least one of each per centre frequency)")
    if bool(args.hot_dut) != bool(args.cold_dut):
        raise UsageError("give both --hot-dut and --cold-dut, or neither")
    if args.hot_dut and not args.hot:
        raise UsageError("--hot-dut/--cold-dut need the --hot/--cold pair without the DUT as reference")
    if (args.tone is None) != (args.level_dbm is None):
        raise UsageError("the gain method needs both --tone CAPTURE and --level-dbm DBM")
    if not args.hot and args.tone is None:
        raise UsageError("give --hot and --cold captures of a noise source, or --tone and --level-dbm")
    if args.noise_band is not None and args.tone is None:
        raise UsageError("--noise-band applies to the gain method (--tone); the Y-factor compares band powers "
                         "over every sub-band")
    if args.hot and args.enr_db is not None and not math.isfinite(args.enr_db):
        raise UsageError(f"--enr-db must be a finite number, got {args.enr_db}")
    if not (math.isfinite(args.cold_k) and args.cold_k > 0):
        raise UsageError(f"--cold-k must be a temperature > 0 K, got {args.cold_k}")
    if not (math.isfinite(args.enr_u_db) and args.enr_u_db >= 0):
        raise UsageError(f"--enr-u-db must be >= 0, got {args.enr_u_db}")
    if args.sub_bands < 1:
        raise UsageError(f"--sub-bands must be >= 1, got {args.sub_bands}")
    if args.level_dbm is not None and not math.isfinite(args.level_dbm):
        raise UsageError(f"--level-dbm must be a finite number, got {args.level_dbm}")
    if args.csv and not Path(args.csv).resolve().parent.is_dir():
        raise UsageError(f"{args.csv}: the folder does not exist")
    if args.csv:
        check_output(args.csv, overwrite=args.overwrite)  # never an input or a recording


def _groups(args) -> list[_Group]:
    """Group the captures by centre frequency; repeats of a role at one centre are pooled."""
    roles = {name: [capture_from_args(p, args) for p in getattr(args, name)] for name in OPTIONS}
    if all(len(caps) <= 1 for caps in roles.values()):
        # One of each: a single group, whatever their metadata says (differences are warned about).
        return [_Group(roles["hot"][0].center_hz, **roles)]
    for cap in (c for caps in roles.values() for c in caps):
        if cap.center_hz is None:
            raise UsageError(f"{cap.path}: no centre frequency in its metadata; with several captures per "
                             "role each needs one (give --center for raw files)")
    table: dict[int, dict[str, list[Capture]]] = {}
    for name, caps in roles.items():
        for cap in caps:
            table.setdefault(round(cap.center_hz), {n: [] for n in ROLES})[name].append(cap)
    groups = []
    for key in sorted(table):
        g = table[key]
        first = next(c for name in ROLES for c in g[name])
        needed = ("hot", "cold") + (("hot_dut", "cold_dut") if roles["hot_dut"] else ())
        for name in needed:
            if not g[name]:
                raise UsageError(f"{first.path}: no --{name.replace('_', '-')} capture at {first.center_hz:g} Hz")
        groups.append(_Group(first.center_hz, **g))
    return groups


def _enr_source(args, groups):
    """(description, function(group) -> float or callable of offset Hz) for the ENR."""
    if args.enr_table is not None:
        table = read_enr_table(args.enr_table)

        def for_group(g):
            if g.center_hz is None:
                raise UsageError(f"{g.hot[0].path}: no centre frequency, needed to look up --enr-table "
                                 "(give --center HZ)")
            return lambda f_hz, c=g.center_hz: table.enr_db_at(c + np.asarray(f_hz))

        return f"table {table.path.name} ({table.range_text})", for_group, table
    if args.enr_db is not None:
        return f"{args.enr_db:.2f} dB", lambda g: float(args.enr_db), None
    values = {c.extra.get("enr_db") for g in groups for c in g.hot}
    if len(values) == 1 and None not in values:
        value = float(values.pop())
        return f"{value:.2f} dB (from the hot capture's metadata)", lambda g: value, None
    raise UsageError("give the noise source's ENR with --enr-db DB or --enr-table CSV")


# ------------------------------------------------------------------------------------- computing


def _group_warnings(g: _Group, healths) -> list[str]:
    out = []
    for role, cap in g.captures:
        effect = ("the hot reading, Y and the noise figure are wrong (NF reads high)" if role.startswith("hot")
                  else "its reading is compressed")
        out += health_warnings(f"{cap.path.name} ({role})", healths[id(cap)], f"{effect}; lower the dongle's gain")
    ra, a = "cold", g.cold[0]  # every other capture of the group is compared with this one
    for rb, b in g.captures[1:]:
        if a.sample_rate_hz != b.sample_rate_hz:
            out.append(f"{a.path.name} ({ra}) and {b.path.name} ({rb}) differ in sample rate "
                       f"({a.sample_rate_hz:g} vs {b.sample_rate_hz:g} Hz): compared over the common band "
                       "only, and the dongle's filter shape may differ between the two")
        ga, gb = a.extra.get("gain_db"), b.extra.get("gain_db")
        if ga is not None and gb is not None and float(ga) != float(gb):
            what = "the DUT's loss" if rb.endswith("dut") else "Y and the noise figure"
            out.append(f"{a.path.name} ({ra}) and {b.path.name} ({rb}) were taken at different dongle gain "
                       f"({float(ga):g} vs {float(gb):g} dB): {what} cannot be trusted")
        if a.center_hz is not None and b.center_hz is not None and a.center_hz != b.center_hz:
            out.append(f"{a.path.name} ({ra}) and {b.path.name} ({rb}) were tuned to different centre "
                       f"frequencies ({a.center_hz:g} vs {b.center_hz:g} Hz)")
    return out


def _analyse_group(g: _Group, enr_spec, args, warnings: list[str]) -> dict:
    nperseg = args.nperseg or choose_nperseg(min(c.n_samples for _, c in g.captures))
    spectra: dict[str, list] = {name: [] for name in ROLES}
    healths = {}
    for name in ROLES:
        for cap in getattr(g, name):
            spectrum, healths[id(cap)] = accumulate(cap, nperseg)
            spectra[name].append(spectrum)
    warnings.extend(_group_warnings(g, healths))
    try:
        ns = nfm.noise_source_analysis(*(spectra[name] for name in ROLES), enr_db=enr_spec,
                                       n_sub_bands=args.sub_bands, t_cold_k=args.cold_k, u_enr_db=args.enr_u_db,
                                       dc_halfwidth_hz=None if g.hot[0].is_complex else 0.0)
    except ValueError as exc:
        raise UsageError(f"--sub-bands {args.sub_bands}: {exc}") from None
    if not ns.valid[-1]:
        raise MeasurementError(
            f"{_names(g.hot)} (hot) reads {fmt_db(float(db_from_power(ns.n_hot[-1] / ns.n_cold[-1])))} dB against "
            f"{_names(g.cold)} (cold): the hot reading must be the higher; are the captures swapped, "
            "or was the source off?")
    rx = ns.receiver
    y_last = float(rx.y[-1])
    result = {
        "center_hz": g.center_hz,
        "sample_rate_hz": g.hot[0].sample_rate_hz,
        "captures": {name: [str(c.path) for c in getattr(g, name)] for name in ROLES if getattr(g, name)},
        "usable_band_hz": [float(ns.low_hz[-1]), float(ns.high_hz[-1])],
        "nperseg": nperseg,
        "dof_hot": float(ns.dof_hot[-1]),
        "dof_cold": float(ns.dof_cold[-1]),
        "y": y_last,
        "enr": float(ns.enr[-1]),
        "noise_factor": float(rx.noise_factor[-1]),
        "u_noise_factor": float(rx.u_noise_factor[-1]),
        "sensitivity": float(nfm.y_sensitivity(y_last, ns.enr[-1], t_cold_k=args.cold_k)),
        "sub": {"low_hz": ns.low_hz[:-1], "high_hz": ns.high_hz[:-1], "center_hz": ns.center_hz[:-1],
                "y": rx.y[:-1], "enr": ns.enr[:-1], "noise_factor": rx.noise_factor[:-1],
                "u_noise_factor": rx.u_noise_factor[:-1]},
    }
    if not ns.valid[:-1].all():
        warnings.append(f"{_names(g.hot)}: in {int((~ns.valid[:-1]).sum())} sub-band(s) the hot reading is "
                        "not above the cold one; no noise figure there")
    if ns.dut is not None:
        if not ns.valid_dut[-1]:
            raise MeasurementError(f"{_names(g.hot_dut)} (hot-dut) is not above {_names(g.cold_dut)} "
                                   "(cold-dut): no noise-source excess came through the DUT")
        d = ns.dut
        result.update(gain=float(d.gain[-1]), u_gain=float(d.u_gain[-1]), dut_noise_factor=float(d.noise_factor[-1]),
                      u_dut_noise_factor=float(d.u_noise_factor[-1]), y_dut=float(d.system.y[-1]))
        result["sub"].update(gain=d.gain[:-1], u_gain=d.u_gain[:-1], dut_noise_factor=d.noise_factor[:-1],
                             u_dut_noise_factor=d.u_noise_factor[:-1])
        if not ns.valid_dut[:-1].all():
            warnings.append(f"{_names(g.hot_dut)}: in {int((~ns.valid_dut[:-1]).sum())} sub-band(s) no excess "
                            "came through the DUT; no loss there")
    return result


def _names(captures: list[Capture]) -> str:
    """File names of pooled captures, for messages."""
    return " + ".join(c.path.name for c in captures)


def _db(x):
    return float(db_from_power(x)) if x is not None and np.isfinite(x) and x > 0 else float("nan")


def _u_db(u, x):
    return float(10.0 / np.log(10.0) * u / x) if np.isfinite(x) and x > 0 else float("nan")


def _curve(results) -> list[dict]:
    """Sub-band rows of every centre frequency, overlaps trimmed, in ascending frequency."""
    absolute = all(r["center_hz"] is not None for r in results)
    keep = [np.ones(r["sub"]["center_hz"].shape, bool) for r in results]
    if absolute and len(results) > 1:
        _, keep = nfm.stitch_offsets([r["center_hz"] for r in results], [r["sub"]["center_hz"] for r in results],
                                     [r["usable_band_hz"] for r in results])
    rows = []
    for r, k in zip(results, keep):
        s, c = r["sub"], (r["center_hz"] if absolute else 0.0)
        for i in np.flatnonzero(k):
            f, u_f = s["noise_factor"][i], s["u_noise_factor"][i]
            row = {
                "frequency_hz" if absolute else "offset_hz": c + s["center_hz"][i],
                "low_hz": c + s["low_hz"][i],
                "high_hz": c + s["high_hz"][i],
                "tuned_hz": r["center_hz"],
                "enr_db": _db(s["enr"][i]),
                "y_db": _db(s["y"][i]),
                "noise_figure_db": _db(f),
                "noise_figure_u_db": _u_db(u_f, f),
                "noise_temperature_k": T0_K * (f - 1.0),
            }
            if "gain" in s:
                g, f1 = s["gain"][i], s["dut_noise_factor"][i]
                row.update(insertion_loss_db=-_db(g), insertion_loss_u_db=_u_db(s["u_gain"][i], g),
                           dut_noise_figure_db=_db(f1), dut_noise_figure_u_db=_u_db(s["u_dut_noise_factor"][i], f1))
            rows.append(row)
    key = "frequency_hz" if absolute else "offset_hz"
    rows.sort(key=lambda row: row[key])
    return rows


def _mean_with_u(values, us):
    """Mean of independent values and its standard uncertainty."""
    v, u = np.asarray(values, float), np.asarray(us, float)
    return float(v.mean()), float(np.sqrt(np.sum(u**2)) / v.size)


def _gain_method(args, warnings: list[str]) -> dict:
    cap = capture_from_args(args.tone, args)
    r = read_capture(cap, nperseg=args.nperseg, noise_band_hz=args.noise_band)
    warnings.extend(r.warnings)
    if r.tone is None or not r.tone.power > 0:
        raise MeasurementError(f"{cap.path}: no tone found above the noise; the gain method needs one")
    require_same_signal([r])  # one capture: its tone must not be the DC spike
    t = r.tone
    nf_db = float(nfm.nf_gain_method_db(args.level_dbm, t.cn0_dbhz))
    u_n0_db = 10.0 / np.log(10.0) * r.floor.u_density / r.floor.density
    u_db = float(np.hypot(t.u_power_db, u_n0_db))
    if args.level_dbm > LEVEL_CAUTION_DBM:
        warnings.append(f"--level-dbm {args.level_dbm:g}: a strong tone compresses the dongle and reads low "
                        "(NF high); the dongle's input is damaged at a few milliwatts (about +10 dBm) — "
                        "never connect a transmitter without attenuation rated for its power")
    if nf_db < 0:
        warnings.append(f"gain method gives NF {nf_db:.2f} dB, below 0 dB, which no receiver has: "
                        "check --level-dbm (cable loss, generator calibration)")
    return {
        "capture": str(cap.path),
        "level_dbm": args.level_dbm,
        "tone_offset_hz": t.offset_hz,
        "cn0_dbhz": t.cn0_dbhz,
        "snr_db": t.snr_db,
        "snr_bandwidth_hz": t.snr_bandwidth_hz,
        "noise_figure_db": nf_db,
        "noise_figure_u_db": u_db,
        "expanded_uncertainty_db": K_EXPANDED * u_db,
        "noise_temperature_k": T0_K * (10 ** (nf_db / 10) - 1.0),
    }


# ------------------------------------------------------------------------------------------ output


def _write_csv(path: Path, rows: list[dict], overwrite: bool) -> None:
    columns: list[str] = []
    for row in rows:
        columns += [k for k in row if k not in columns]
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=columns, lineterminator="\n")
    w.writeheader()
    for row in rows:
        w.writerow({k: ("" if v is None or (isinstance(v, float) and not math.isfinite(v)) else
                        (repr(float(v)) if isinstance(v, float) else v)) for k, v in row.items()})  # full precision
    with atomic_path(path, overwrite) as tmp:
        tmp.write_text(buf.getvalue(), encoding="utf-8")


def _pm(value_db, u_db, digits=2) -> str:
    return f"{fmt_db(value_db, digits)} dB ± {fmt_db(K_EXPANDED * u_db, digits)} dB"


def run(args: argparse.Namespace) -> int:
    _validate(args)
    warnings: list[str] = []
    result: dict = {"method": None, "noise_figure_db": None, "noise_temperature_k": None, "y_db": None,
                    "t_cold_k": args.cold_k, "coverage_factor": K_EXPANDED}
    lines: list[str] = []
    results = []
    if args.hot:
        groups = _groups(args)
        enr_text, enr_for, table = _enr_source(args, groups)
        for g in groups:
            r = _analyse_group(g, enr_for(g), args, warnings)
            if table is not None:
                lo, hi = (g.center_hz + r["usable_band_hz"][0], g.center_hz + r["usable_band_hz"][1])
                if not table.covers(lo, hi):
                    warnings.append(f"{_names(g.hot)}: the usable band {lo / 1e6:.4f}-{hi / 1e6:.4f} MHz reaches "
                                    f"beyond the ENR table ({table.range_text}); ENR held at the table's end value")
            results.append(r)
        f_mean, u_f = _mean_with_u([r["noise_factor"] for r in results], [r["u_noise_factor"] for r in results])
        y_mean = float(np.mean([r["y"] for r in results]))
        enr_mean = float(np.mean([r["enr"] for r in results]))
        nf_db, u_nf_db = _db(f_mean), _u_db(u_f, f_mean)
        result.update(
            method="y-factor", noise_figure_db=nf_db, noise_figure_u_db=u_nf_db,
            noise_figure_expanded_uncertainty_db=K_EXPANDED * u_nf_db,
            noise_temperature_k=T0_K * (f_mean - 1.0), noise_temperature_u_k=T0_K * u_f,
            y_db=_db(y_mean), enr_db=_db(enr_mean), enr=enr_text, enr_u_db=args.enr_u_db,
        )
        if f_mean < 1.0:
            warnings.append(f"noise figure {nf_db:.2f} dB is below 0 dB, which is impossible: the ENR is too high, "
                            "or the dongle's gain (AGC) changed between the hot and cold captures")
        for r in results:
            at = "" if r["center_hz"] is None else f" at {r['center_hz'] / 1e6:g} MHz"
            u95 = K_EXPANDED * _u_db(r["u_noise_factor"], r["noise_factor"])
            if abs(r["sensitivity"]) > Y_SENSITIVITY_WARN or u95 > U_WARN_DB:
                warnings.append(
                    f"Y = {_db(r['y']):.2f} dB{at} is small for a trustworthy noise figure: NF uncertain by "
                    f"±{u95:.2f} dB (95 %) from averaging alone, and every 0.1 dB of error in Y (gain drift, the "
                    f"source's match changing between on and off) moves it by {abs(r['sensitivity']) * 0.1:.2f} dB; "
                    "use a source with more ENR")
        dut = results[0].get("gain") is not None
        if dut:
            g_mean, u_g = _mean_with_u([r["gain"] for r in results], [r["u_gain"] for r in results])
            f1_mean, u_f1 = _mean_with_u([r["dut_noise_factor"] for r in results],
                                         [r["u_dut_noise_factor"] for r in results])
            il_db, u_il_db = -_db(g_mean), _u_db(u_g, g_mean)
            result.update(
                insertion_loss_db=il_db, insertion_loss_u_db=u_il_db,
                insertion_loss_expanded_uncertainty_db=K_EXPANDED * u_il_db,
                dut_noise_figure_db=_db(f1_mean), dut_noise_figure_u_db=_u_db(u_f1, f1_mean),
            )
            if g_mean > 1.0:
                warnings.append(f"the DUT shows {-il_db:.2f} dB of gain: not a passive device, or the dongle's gain "
                                "changed between the reference and the DUT captures")
            if K_EXPANDED * u_il_db > U_WARN_DB:
                warnings.append(f"insertion loss uncertain by ±{K_EXPANDED * u_il_db:.2f} dB (95 %): too little "
                                "noise-source excess came through the DUT; use more ENR or longer captures")
        result["bands"] = [
            {
                "center_hz": r["center_hz"], "sample_rate_hz": r["sample_rate_hz"], "captures": r["captures"],
                "usable_band_hz": r["usable_band_hz"], "nperseg": r["nperseg"],
                "dof_hot": r["dof_hot"], "dof_cold": r["dof_cold"],
                "y_db": _db(r["y"]), "enr_db": _db(r["enr"]),
                "noise_figure_db": _db(r["noise_factor"]),
                "noise_figure_u_db": _u_db(r["u_noise_factor"], r["noise_factor"]),
                "noise_temperature_k": T0_K * (r["noise_factor"] - 1.0),
                "nf_per_y_db": r["sensitivity"],
                **({"insertion_loss_db": -_db(r["gain"]), "insertion_loss_u_db": _u_db(r["u_gain"], r["gain"]),
                    "dut_noise_figure_db": _db(r["dut_noise_factor"]),
                    "dut_noise_figure_u_db": _u_db(r["u_dut_noise_factor"], r["dut_noise_factor"])} if dut else {}),
            }
            for r in results
        ]
        curve = _curve(results)
        result["curve"] = curve
        if curve and "frequency_hz" in curve[0]:  # absolute frequencies: summarise per amateur band
            from rxbench.sweep_report import loss_band_rows, nf_band_rows

            f = [r["frequency_hz"] for r in curve]
            w = [r["high_hz"] - r["low_hz"] for r in curve]
            if "insertion_loss_db" in curve[0]:
                result["per_band"] = loss_band_rows("", f, w, [r["insertion_loss_db"] for r in curve],
                                                    [r["insertion_loss_u_db"] for r in curve], k=K_EXPANDED)
            result["per_band_noise_figure"] = nf_band_rows(f, w, [r["noise_figure_db"] for r in curve],
                                                           [r["noise_figure_u_db"] for r in curve],
                                                           u_enr_db=args.enr_u_db, k=K_EXPANDED)
        lines += _human_y(result, results, curve, args)
    if args.tone is not None:
        gm = _gain_method(args, warnings)
        result["gain_method"] = gm
        if result["method"] is None:
            result.update(method="gain", noise_figure_db=gm["noise_figure_db"],
                          noise_figure_u_db=gm["noise_figure_u_db"],
                          noise_figure_expanded_uncertainty_db=gm["expanded_uncertainty_db"],
                          noise_temperature_k=gm["noise_temperature_k"])
        lines += [
            f"Noise figure by the gain method ({Path(gm['capture']).name}, tone {gm['level_dbm']:g} dBm at the input)",
            f"  C/N0               {fmt_db(gm['cn0_dbhz'], 1)} dB-Hz",
            f"  noise figure       {_pm(gm['noise_figure_db'], gm['noise_figure_u_db'])} (95 %, tone and noise "
            "reading only; add the generator's level accuracy)",
        ]
    if args.csv:
        if not result.get("curve"):
            raise UsageError("--csv writes the noise-source curve; it needs --hot and --cold captures")
        _write_csv(Path(args.csv), result["curve"], args.overwrite)
        result["csv"] = str(args.csv)
        lines.append(f"Curve written to {args.csv}")
    result["warnings"] = warnings
    emit(args, result, "\n".join(lines), warnings)
    return 0


def _human_y(result, results, curve, args) -> list[str]:
    many = len(results) > 1
    lines = [f"Noise figure by the Y-factor method (ENR {result['enr']}, T_cold {args.cold_k:g} K)"]
    if many:
        lines.append(f"  averaged over {len(results)} centre frequencies (each band below)")
    lines += [
        f"  Y                  {fmt_db(result['y_db'])} dB",
        f"  noise figure       {_pm(result['noise_figure_db'], result['noise_figure_u_db'])} (95 %)",
        f"  noise temperature  {result['noise_temperature_k']:.0f} K ± {K_EXPANDED * result['noise_temperature_u_k']:.0f} K",
    ]
    if "insertion_loss_db" in result:
        lines += [
            f"  DUT insertion loss {_pm(result['insertion_loss_db'], result['insertion_loss_u_db'])} (95 %)",
            f"  DUT noise figure   {_pm(result['dut_noise_figure_db'], result['dut_noise_figure_u_db'])} (95 %)",
        ]
    lines.append("  uncertainty: averaging only" + (f" and ENR (±{args.enr_u_db:g} dB standard)" if args.enr_u_db
                                                   else "; the ENR's own uncertainty is not included (--enr-u-db)"))
    if many:
        for b in result["bands"]:
            lines.append(f"  {fmt_hz_band(b['center_hz']):>18}  Y {fmt_db(b['y_db'])} dB  NF "
                         f"{_pm(b['noise_figure_db'], b['noise_figure_u_db'])}"
                         + (f"  loss {_pm(b['insertion_loss_db'], b['insertion_loss_u_db'])}"
                            if "insertion_loss_db" in b else ""))
    absolute = curve and "frequency_hz" in curve[0]
    head = "  frequency MHz" if absolute else "  offset kHz   "
    dut = curve and "insertion_loss_db" in curve[0]
    lines.append("Across frequency (± is U, k = 2):")
    lines.append(head + "   NF dB       " + ("   loss dB" if dut else ""))
    for row in curve:
        f = row["frequency_hz"] / 1e6 if absolute else row["offset_hz"] / 1e3
        text = f"  {f:13.3f}" if absolute else f"  {f:+13.3f}"
        text += f"   {fmt_db(row['noise_figure_db'])} ± {fmt_db(K_EXPANDED * row['noise_figure_u_db'])}"
        if dut:
            text += f"   {fmt_db(row['insertion_loss_db'])} ± {fmt_db(K_EXPANDED * row['insertion_loss_u_db'])}"
        lines.append(text)
    return lines
