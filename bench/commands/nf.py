"""``rxbench nf``: the receive system's noise figure from a noise source (Y-factor) or a tone of known
level (gain method), and a DUT's insertion loss and noise figure across frequency from the noise
source with and without the DUT in the path. Captures at several centre frequencies are stitched
into one curve.

This module parses the flags, groups the captures by centre frequency, reads them alike, and
renders the results of :mod:`rxbench.methods.noise_source`, :mod:`rxbench.methods.noise_curve` and
:mod:`rxbench.methods.gain` (the methods a session calls too) as text, CSV or JSON."""

from __future__ import annotations

import argparse
import csv
import io
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from rxbench.dsp.subbands import N_SUB_BANDS
from rxbench.dsp.units import T0_K
from rxbench.enr import read_enr_table
from rxbench.errors import UnlikeCapturesError, UsageError
from rxbench.files import check_output
from rxbench.methods.common import COVERAGE_FACTOR
from rxbench.methods.gain import gain_method
from rxbench.methods.noise_curve import NoiseFigureResult, noise_figure_curve
from rxbench.methods.noise_source import NoiseSourceBand, Spectrum, _db, y_factor_band
from rxbench.output import add_json_option, emit, fmt_db
from rxbench.quantities import arg as quantity_arg
from rxbench.options import add_noise_band_option
from rxbench.reading import accumulate, choose_nperseg, health_warnings, read_capture
from rxbench.recordings import Capture, add_capture_options, atomic_path, capture_from_args
from rxbench.style import fmt_hz_band

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
    p.add_argument("--sub-bands", type=int, default=N_SUB_BANDS, metavar="N",
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
        if a.center_hz is not None and b.center_hz is not None and a.center_hz != b.center_hz:
            out.append(f"{a.path.name} ({ra}) and {b.path.name} ({rb}) were tuned to different centre "
                       f"frequencies ({a.center_hz:g} vs {b.center_hz:g} Hz)")
    return out


def _band(g: _Group, enr_db, args, warnings: list[str]) -> NoiseSourceBand:
    """The captures of one centre frequency read alike, then the Y-factor method."""
    nperseg = args.nperseg or choose_nperseg(min(c.n_samples for _, c in g.captures))
    spectra: dict[str, list[Spectrum]] = {name: [] for name in ROLES}
    healths = {}
    for name in ROLES:
        for cap in getattr(g, name):
            psd, healths[id(cap)] = accumulate(cap, nperseg)
            spectra[name].append(Spectrum(cap, psd))
    warnings.extend(_group_warnings(g, healths))
    try:
        return y_factor_band(*(spectra[name] for name in ROLES), enr_db=enr_db, n_sub_bands=args.sub_bands,
                             t_cold_k=args.cold_k, u_enr_db=args.enr_u_db)
    except UnlikeCapturesError:
        raise
    except UsageError as exc:
        raise UsageError(f"--sub-bands {exc}") from None


def _names(captures: list[Capture]) -> str:
    """File names of pooled captures, for messages."""
    return " + ".join(c.path.name for c in captures)


def _y_factor(args, warnings: list[str]) -> NoiseFigureResult:
    groups = _groups(args)
    enr_text, enr_for, table = _enr_source(args, groups)
    bands = []
    for g in groups:
        band = _band(g, enr_for(g), args, warnings)
        if table is not None:
            lo, hi = (g.center_hz + band.band_hz[0], g.center_hz + band.band_hz[1])
            if not table.covers(lo, hi):
                warnings.append(f"{_names(g.hot)}: the usable band {lo / 1e6:.4f}-{hi / 1e6:.4f} MHz reaches "
                                f"beyond the ENR table ({table.range_text}); ENR held at the table's end value")
        bands.append(band)
    return noise_figure_curve(bands, enr=enr_text, u_enr_db=args.enr_u_db, t_cold_k=args.cold_k)


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
    return f"{fmt_db(value_db, digits)} dB ± {fmt_db(COVERAGE_FACTOR * u_db, digits)} dB"


def run(args: argparse.Namespace) -> int:
    _validate(args)
    warnings: list[str] = []
    result: dict = {"method": None, "noise_figure_db": None, "noise_temperature_k": None, "y_db": None,
                    "t_cold_k": args.cold_k, "coverage_factor": COVERAGE_FACTOR}
    lines: list[str] = []
    y = None
    if args.hot:
        y = _y_factor(args, warnings)
        result.update(y.to_dict())
        lines += _human_y(y, args)
    if args.tone is not None:
        cap = capture_from_args(args.tone, args)
        gm = gain_method(read_capture(cap, nperseg=args.nperseg, noise_band_hz=args.noise_band), args.level_dbm)
        g = gm.to_dict()
        result["gain_method"] = g
        if y is None:
            result.update(method="gain", noise_figure_db=gm.noise_figure_db, noise_figure_u_db=gm.u_noise_figure_db,
                          noise_figure_expanded_uncertainty_db=gm.expanded_uncertainty_db,
                          noise_temperature_k=gm.noise_temperature_k)
        warnings.extend(gm.warnings)
        lines += [
            f"Noise figure by the gain method ({cap.path.name}, tone {gm.level_dbm:g} dBm at the input)",
            f"  C/N0               {fmt_db(gm.cn0_dbhz, 1)} dB-Hz",
            f"  noise figure       {_pm(gm.noise_figure_db, gm.u_noise_figure_db)} (95 %, tone and noise "
            "reading only; add the generator's level accuracy)",
        ]
    if y is not None:
        warnings.extend(y.warnings)
    if args.csv:
        if y is None:
            raise UsageError("--csv writes the noise-source curve; it needs --hot and --cold captures")
        _write_csv(Path(args.csv), result["curve"], args.overwrite)
        result["csv"] = str(args.csv)
        lines.append(f"Curve written to {args.csv}")
    result["warnings"] = warnings
    emit(args, result, "\n".join(lines), warnings)
    return 0


def _human_y(y: NoiseFigureResult, args) -> list[str]:
    result = y.to_dict()
    many = len(y.bands) > 1
    lines = [f"Noise figure by the Y-factor method (ENR {y.enr}, T_cold {args.cold_k:g} K)"]
    if many:
        lines.append(f"  averaged over {len(y.bands)} centre frequencies (each band below)")
    lines += [
        f"  Y                  {fmt_db(result['y_db'])} dB",
        f"  noise figure       {_pm(result['noise_figure_db'], result['noise_figure_u_db'])} (95 %)",
        f"  noise temperature  {result['noise_temperature_k']:.0f} K ± "
        f"{COVERAGE_FACTOR * result['noise_temperature_u_k']:.0f} K",
    ]
    if y.has_dut:
        lines += [
            f"  DUT insertion loss {_pm(result['insertion_loss_db'], result['insertion_loss_u_db'])} (95 %)",
            f"  DUT noise figure   {_pm(result['dut_noise_figure_db'], result['dut_noise_figure_u_db'])} (95 %)",
        ]
    lines.append("  uncertainty: averaging only" + (f" and ENR (±{args.enr_u_db:g} dB standard)" if args.enr_u_db
                                                   else "; the ENR's own uncertainty is not included (--enr-u-db)"))
    if many:
        for b in y.bands:
            lines.append(f"  {fmt_hz_band(b.center_hz):>18}  Y {fmt_db(_db(b.y))} dB  NF "
                         f"{_pm(b.noise_figure_db, b.u_noise_figure_db)}"
                         + (f"  loss {_pm(b.insertion_loss_db, b.u_insertion_loss_db)}" if b.has_dut else ""))
    absolute = y.absolute
    head = "  frequency MHz" if absolute else "  offset kHz   "
    lines.append("Across frequency (± is U, k = 2):")
    lines.append(head + "   NF dB       " + ("   loss dB" if y.has_dut else ""))
    for row in y.curve:
        f = row["frequency_hz"] / 1e6 if absolute else row["offset_hz"] / 1e3
        text = f"  {f:13.3f}" if absolute else f"  {f:+13.3f}"
        text += f"   {fmt_db(row['noise_figure_db'])} ± {fmt_db(COVERAGE_FACTOR * row['noise_figure_u_db'])}"
        if y.has_dut:
            text += f"   {fmt_db(row['insertion_loss_db'])} ± {fmt_db(COVERAGE_FACTOR * row['insertion_loss_u_db'])}"
        lines.append(text)
    return lines
