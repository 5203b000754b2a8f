"""``shaftwatch spectrum``, ``band-waveform``, ``levels`` and ``info``: one recording (a
file, or a run of an archive with ``--archive``/``--run``); spectrum peaks are tied to a
machine model's sources (:mod:`engine.commands.peak_labels`)."""

from __future__ import annotations

import argparse
from dataclasses import replace
from pathlib import Path

import numpy as np

from ..bandfilter import band_waveform
from ..errors import InputError
from ..io.csvfile import write_csv
from ..io.wav import write_wav
from ..recording import Recording
from ..levels import overall_levels
from ..peaks import find_peaks
from ..spectrum import AVERAGING, SCALES, Spectrum, SpectrumSettings, compute_spectrum
from ..units import DEFAULT_LOW_CUT_HZ, integration_steps, unit
from ..windows import WINDOWS
from . import peak_labels
from .common import (
    LoadedChannel,
    add_input_options,
    add_json_option,
    emit_json,
    fmt,
    load_channel,
    print_pairs,
    print_table,
    print_warnings,
    read_input,
)


def add_spectrum_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("spectrum")
    g.add_argument("--unit", metavar="U",
                   help="unit of the spectrum (default: the input unit); integrating "
                        "from acceleration to mm/s or um is done per line")
    g.add_argument("--scale", choices=SCALES, default="rms",
                   help="peak, rms or pp amplitude; psd (unit²/Hz) or asd (unit/√Hz)")
    g.add_argument("--window", default="hann", choices=list(WINDOWS), metavar="W",
                   help=f"window: {', '.join(WINDOWS)} (default hann)")
    g.add_argument("--fmax", type=float, metavar="HZ",
                   help="highest frequency, Hz (default: sample rate / 2.56)")
    g.add_argument("--lines", type=int, default=1600, metavar="N",
                   help="number of lines, 100 … 25600 (default 1600)")
    g.add_argument("--averages", type=int, metavar="N",
                   help="frames to average (default: as many as the recording holds)")
    g.add_argument("--overlap", type=float, default=0.5, metavar="F",
                   help="overlap of frames, 0 … 0.9 (default 0.5)")
    g.add_argument("--averaging", choices=AVERAGING, default="linear",
                   help="linear (power), exponential or peak-hold (default linear)")
    g.add_argument("--low-cut", type=float, default=DEFAULT_LOW_CUT_HZ, metavar="HZ",
                   help=f"lines below this are zeroed when integrating (default {DEFAULT_LOW_CUT_HZ:g} Hz)")
    g.add_argument("--db", action="store_true",
                   help="amplitudes in dB re the ISO 1683 reference value")


def settings_from(args: argparse.Namespace) -> SpectrumSettings:
    return SpectrumSettings(fmax_hz=args.fmax, lines=args.lines, window=args.window,
                            averages=args.averages, overlap=args.overlap,
                            averaging=args.averaging, scale=args.scale)


def spectrum_of(ch: LoadedChannel, args: argparse.Namespace) -> Spectrum:
    out_unit = args.unit or ch.unit
    unit(out_unit, source=ch.source, field="--unit")
    return compute_spectrum(ch.samples, ch.fs_hz, unit_in=ch.unit, unit_out=out_unit,
                            settings=settings_from(args), low_cut_hz=args.low_cut,
                            source=ch.source)


def run_spectrum(args: argparse.Namespace) -> int:
    ch = load_channel(args)
    spec = spectrum_of(ch, args)
    # When integrating, the lines just above the low cut rise as 1/f towards the cut;
    # their edge is not a machine's peak.
    lowest = (args.low_cut + 3 * spec.resolution_hz
              if integration_steps(ch.unit, spec.unit) > 0 else None)
    ctx, label_warnings = peak_labels.model_context(args, ch.rpm)
    # With a machine model, orders are of the point's shaft (reference speed × ratio).
    order_rpm = ch.rpm if ctx is None else ctx.shaft_rpm
    peaks = find_peaks(spec, count=args.peaks, rpm=order_rpm, min_frequency_hz=lowest)
    labels = None if ctx is None else peak_labels.label(
        peaks, ctx.sources(), shaft=ctx.shaft, tolerance_hz=spec.resolution_hz,
        tolerance_pct=args.tolerance_pct)
    warnings = ch.warnings() + spec.warnings + label_warnings
    amplitude = spec.in_db() if args.db else spec.amplitude
    if args.output:
        header = f"frequency_hz,{'level_db' if args.db else 'amplitude'}_{spec.scale}_{spec.unit}"
        np.savetxt(args.output, np.column_stack([spec.frequency_hz, amplitude]),
                   delimiter=",", header=header, comments="", fmt="%.9g")
    bands = [{"low_hz": lo, "high_hz": hi, "rms": spec.band_rms(lo, hi), "unit": spec.unit}
             for lo, hi in (args.band or [])]
    if args.json:
        d = spec.as_dict()
        d["bands"] = bands
        d["amplitude"] = np.asarray(amplitude).tolist()
        d["db"] = bool(args.db)
        d["source"] = ch.source
        d["channel"] = ch.index
        d["rpm"] = ch.rpm
        d["peaks"] = [p.as_dict() for p in peaks]
        if labels is not None:
            for p, srcs in zip(d["peaks"], labels):
                p["sources"] = srcs
            d["labels"] = {**ctx.as_dict(), "tolerance_pct": args.tolerance_pct,
                           "tolerance_hz": spec.resolution_hz}
        d["warnings"] = warnings
        emit_json(d)
        return 0
    print_pairs([
        ("file", ch.source), ("channel", str(ch.index)),
        ("unit", f"{spec.unit_label} {spec.scale}" + (" (dB re ISO 1683)" if args.db else "")),
        ("window", spec.window), ("Fmax", f"{spec.fmax_hz:g} Hz"), ("lines", str(spec.lines)),
        ("resolution", f"{spec.resolution_hz:.5g} Hz"), ("ENBW", f"{spec.enbw_hz:.5g} Hz"),
        ("averages", f"{spec.averages} ({spec.averaging}, {spec.overlap:.0%} overlap)"),
    ] + ([] if ctx is None else [
        ("machine model", ctx.origin),
        ("orders of", f"{ctx.shaft or 'reference'} shaft"
                      + (f" at {ctx.shaft_rpm:.1f} rpm" if ctx.shaft_rpm else "")),
        ("label tolerance", f"{args.tolerance_pct:g} % (at least {spec.resolution_hz:.4g} Hz)"),
    ]))
    print()
    headers = ["#", "frequency Hz", "CPM", f"amplitude {spec.unit_label}"]
    if order_rpm:
        headers.append("order")
    if labels is not None:
        headers.append("sources")
    rows = []
    for i, p in enumerate(peaks, 1):
        amp = spec.in_db()[p.line] if args.db else p.amplitude
        row = [i, p.frequency_hz, p.frequency_hz * 60.0, amp]
        if order_rpm:
            row.append(f"{p.order:.3f}×")
        if labels is not None:
            row.append(peak_labels.names(labels[i - 1]))
        rows.append(row)
    print_table(headers, rows)
    if bands:
        print()
        print_table(["band Hz", f"RMS {spec.unit_label}"],
                    [[f"{b['low_hz']:g}–{b['high_hz']:g}", b["rms"]] for b in bands])
    print_warnings(warnings)
    return 0


def run_band_waveform(args: argparse.Namespace) -> int:
    ch = load_channel(args)
    lo, hi = args.band
    y = band_waveform(ch.samples, ch.fs_hz, (lo, hi), keep=not args.remove, source=ch.source)
    out = Recording(fs_hz=ch.fs_hz, channels=[replace(ch.recording.channels[ch.index],
                                                      samples=y, full_scale=None)],
                    source=args.output, rpm=ch.rpm, taken=ch.recording.taken)
    suffix = Path(args.output).suffix.lower()
    if suffix == ".wav":
        write_wav(args.output, out, bits=32, sample_format="float")
    elif suffix in (".csv", ".tsv", ".txt"):
        write_csv(args.output, out, with_time=True)
    else:
        raise InputError(f"{args.output}: output must end in .wav or .csv")
    stats = {"output": args.output, "band_hz": [lo, hi], "kept": not args.remove,
             "rms_in": float(np.std(ch.samples)), "rms_out": float(np.std(y)),
             "unit": ch.unit}
    if args.json:
        emit_json(stats)
    else:
        print_pairs([("written", args.output),
                     ("band", f"{lo:g}–{hi:g} Hz {'kept' if not args.remove else 'removed'}"),
                     ("RMS before", f"{fmt(stats['rms_in'])} {ch.unit}"),
                     ("RMS after", f"{fmt(stats['rms_out'])} {ch.unit}")])
    return 0


def run_levels(args: argparse.Namespace) -> int:
    ch = load_channel(args)
    band = tuple(args.band) if args.band else None
    lv = overall_levels(ch.samples, ch.fs_hz, unit_in=ch.unit, rpm=ch.rpm,
                        velocity_band_hz=band, source=ch.source)
    warnings = ch.warnings()
    if args.json:
        d = lv.as_dict()
        d.update(source=ch.source, channel=ch.index, rpm=ch.rpm, warnings=warnings)
        emit_json(d)
        return 0
    lo, hi = lv.velocity_band_hz
    print_pairs([
        ("file", ch.source), ("channel", str(ch.index)),
        (f"velocity RMS {lo:g}–{hi:g} Hz", f"{fmt(lv.velocity_rms_mm_s)} mm/s"),
        ("acceleration RMS", f"{fmt(lv.acceleration_rms_g)} g"),
        ("acceleration peak", f"{fmt(lv.acceleration_peak_g)} g"),
        ("displacement peak-to-peak", f"{fmt(lv.displacement_pp_um)} µm"),
        ("crest factor", lv.crest_factor), ("kurtosis", lv.kurtosis),
        ("skewness", lv.skewness),
    ])
    print_warnings(warnings)
    return 0


def run_info(args: argparse.Namespace) -> int:
    rec = read_input(args)
    chans = []
    for i, c in enumerate(rec.channels):
        x = c.samples
        finite = x[np.isfinite(x)]
        chans.append({
            "index": i, "name": c.name, "unit": c.unit, "direction": c.direction,
            "full_scale": c.full_scale, "sensitivity_v_per_unit": c.sensitivity_v_per_unit,
            "min": float(finite.min()) if finite.size else None,
            "max": float(finite.max()) if finite.size else None,
            "rms": float(np.sqrt(np.mean((finite - finite.mean()) ** 2))) if finite.size else None,
            "tach": rec.tach_channel == i,
        })
    d = {"source": rec.source, "sample_rate_hz": rec.fs_hz, "samples": rec.n_samples,
         "duration_s": rec.duration_s, "rpm": rec.rpm,
         "taken": rec.taken.isoformat() if rec.taken else None,
         "channels": chans, "quality": [q.as_dict() for q in rec.quality]}
    if args.json:
        emit_json(d)
        return 1 if rec.errors() else 0
    print_pairs([("file", rec.source), ("sample rate", f"{rec.fs_hz:g} Hz"),
                 ("samples", str(rec.n_samples)), ("duration", f"{rec.duration_s:.4g} s"),
                 ("speed", f"{rec.rpm:g} rpm" if rec.rpm else "—")])
    print()
    print_table(["#", "name", "unit", "min", "max", "RMS (AC)"],
                [[c["index"], c["name"] or "—", c["unit"], c["min"], c["max"], c["rms"]]
                 for c in chans])
    print()
    if rec.quality:
        print_table(["channel", "severity", "finding"],
                    [["all" if q.channel is None else str(q.channel), q.severity, q.message]
                     for q in rec.quality])
    else:
        print("data quality: no findings")
    return 1 if rec.errors() else 0


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("spectrum", help="averaged, amplitude-correct spectrum of a recording",
                       description="Averaged spectrum of one channel with its largest "
                                   "peaks; with a machine model (--archive/--run, or "
                                   "--machine-file with --rpm) each peak is listed with "
                                   "the sources it matches, closest first.")
    add_input_options(p)
    add_spectrum_options(p)
    p.add_argument("--peaks", type=int, default=10, metavar="K",
                   help="how many peaks to list, largest first (default 10)")
    p.add_argument("-o", "--output", metavar="FILE.csv", help="also write the spectrum to CSV")
    p.add_argument("--band", type=float, nargs=2, action="append", metavar=("LO", "HI"),
                   help="also give the RMS level in this band, Hz (repeatable)")
    peak_labels.add_model_options(p, tolerance_pct=1.0, why="speed uncertainty, "
                                                             "common practice")
    add_json_option(p)
    p.set_defaults(func=run_spectrum)

    p = sub.add_parser("band-waveform", help="keep or remove one band of a waveform",
                       description="Band-limited inverse transform: write the waveform "
                                   "with only one band kept (or removed) to WAV or CSV.")
    add_input_options(p)
    p.add_argument("--band", type=float, nargs=2, required=True, metavar=("LO", "HI"),
                   help="band edges, Hz")
    p.add_argument("--remove", action="store_true", help="remove the band instead of keeping it")
    p.add_argument("-o", "--output", required=True, metavar="FILE", help="output .wav or .csv")
    add_json_option(p)
    p.set_defaults(func=run_band_waveform)

    p = sub.add_parser("levels", help="overall levels: velocity RMS, acceleration, crest factor",
                       description="Overall levels of one channel (ISO 20816-1 broadband "
                                   "velocity, acceleration RMS and peak, displacement, "
                                   "crest factor, kurtosis).")
    add_input_options(p)
    p.add_argument("--band", type=float, nargs=2, metavar=("LO", "HI"),
                   help="velocity band, Hz (default 10–1000, or 2–1000 at or below 600 rpm)")
    add_json_option(p)
    p.set_defaults(func=run_levels)

    p = sub.add_parser("info", help="channels, sample rate, duration and data quality of a file",
                       description="What a recording holds, and its data-quality findings. "
                                   "Exit status 1 when a channel cannot be analysed.")
    add_input_options(p)
    add_json_option(p)
    p.set_defaults(func=run_info)

