"""``shaftwatch bearing``, ``envelope``, ``orders`` and ``speed``: analysis of one file
(or one run of an archive); envelope peaks are tied to the defect lines of a bearing
given by its geometry, or of the machine model's bearings on the point's shaft."""

from __future__ import annotations

import argparse
from dataclasses import replace

import numpy as np

from ..bearings import BearingGeometry, defect_frequencies_hz, defect_orders
from ..envelope import ENVELOPE_SETTINGS, defect_matches, envelope_spectrum
from ..errors import InputError
from ..orders import order_cut, order_spectrum
from ..peaks import find_peaks
from ..speed import estimate_speed
from ..tach import detect_pulses
from . import peak_labels
from .common import (
    add_input_options,
    add_json_option,
    emit_json,
    fmt,
    load_channel,
    print_pairs,
    print_table,
    print_warnings,
)

DEFECTS = ("ftf", "bsf", "bpfo", "bpfi")


def add_geometry_options(p: argparse.ArgumentParser, *, required: bool) -> None:
    g = p.add_argument_group("bearing geometry")
    g.add_argument("--elements", type=int, required=required, metavar="N",
                   help="number of rolling elements")
    g.add_argument("--element-diameter", type=float, required=required, metavar="D",
                   help="rolling-element diameter")
    g.add_argument("--pitch-diameter", type=float, required=required, metavar="P",
                   help="pitch diameter (same unit as the element diameter)")
    g.add_argument("--contact-angle", type=float, default=0.0, metavar="DEG",
                   help="contact angle, degrees (default 0)")
    g.add_argument("--geometry-unit", choices=("mm", "in"), default="mm",
                   help="unit of the diameters (default mm)")


def geometry_from(args: argparse.Namespace) -> BearingGeometry | None:
    given = [args.elements, args.element_diameter, args.pitch_diameter]
    if all(v is None for v in given):
        return None
    if any(v is None for v in given):
        raise InputError("bearing geometry needs --elements, --element-diameter and "
                         "--pitch-diameter together")
    return BearingGeometry("bearing", args.elements, args.element_diameter,
                           args.pitch_diameter, args.contact_angle, args.geometry_unit)


def run_bearing(args: argparse.Namespace) -> int:
    geo = geometry_from(args)
    orders = defect_orders(geo).as_dict()
    d = {k: orders[k] for k in ("ftf", "bsf", "bsf2", "bpfo", "bpfi")}
    if args.rpm is not None:
        if not args.rpm > 0:
            raise InputError(f"--rpm must be a positive number, got {args.rpm}")
        hz = defect_frequencies_hz(geo, args.rpm)
        d.update({f"{k}_hz": hz[k] for k in hz})
        d["rpm"] = args.rpm
    if args.json:
        emit_json(d)
        return 0
    rows = [[name.upper() if name != "bsf2" else "2×BSF", d[name],
             d.get(f"{name}_hz", "—")] for name in ("ftf", "bsf", "bsf2", "bpfo", "bpfi")]
    print_table(["defect", "order of shaft speed", "Hz" if args.rpm else "Hz (give --rpm)"],
                rows)
    return 0


def run_envelope(args: argparse.Namespace) -> int:
    ch = load_channel(args)
    band = tuple(args.band) if args.band else None
    if band is not None and args.auto:
        raise InputError("give either --band LO HI or --auto, not both")
    settings = replace(ENVELOPE_SETTINGS, fmax_hz=args.fmax, lines=args.lines)
    res = envelope_spectrum(ch.samples, ch.fs_hz, band_hz=band, settings=settings, unit="g",
                            source=ch.source)
    geo = geometry_from(args)
    if geo is not None and (args.machine_file or args.shaft):
        raise InputError("give the bearing geometry options or a machine model "
                         "(--machine-file, --shaft), not both")
    ctx, label_warnings = (None, []) if geo is not None else \
        peak_labels.model_context(args, ch.rpm)
    # With a machine model, orders are of the point's shaft (reference speed × ratio).
    peaks = find_peaks(res.spectrum, count=args.peaks,
                       rpm=ch.rpm if ctx is None else ctx.shaft_rpm)
    defects, labels, model_sources = [], {}, None
    if geo is not None:
        if ch.rpm is None:
            raise InputError(f"{ch.source}: defect matching needs the shaft speed (--rpm)")
        shaft_rpm = ch.rpm
        if getattr(args, "archive", None) and args.rpm is None:
            # A run's stored speed is the reference shaft's; the bearing turns with the
            # point's shaft (reference speed × its ratio in the machine model).
            speed_ctx, _ = peak_labels.model_context(args, ch.rpm)
            if speed_ctx is not None and speed_ctx.shaft_rpm:
                shaft_rpm = speed_ctx.shaft_rpm
        hz = defect_frequencies_hz(geo, shaft_rpm)
        targets = {k.upper(): hz[k] for k in DEFECTS}
        for m in defect_matches(res.spectrum, targets):
            defects.append({"name": m.name, "frequency_hz": m.frequency_hz,
                            "harmonics_found": m.harmonics_found, "amplitude": m.amplitude,
                            "snr_db": m.snr_db})
        for p in peaks:
            near = [(abs(p.frequency_hz / (k * f) - 1), f"{k}×{n}" if k > 1 else n)
                    for n, f in targets.items() for k in (1, 2, 3, 4)]
            err, name = min(near)
            if err <= 0.02:  # 1–2 % slip of real bearings (Randall & Antoni 2011)
                labels[p.line] = name
    elif ctx is not None and ctx.shaft_rpm and ctx.bearings_on_shaft():
        defects = _model_defects(res.spectrum, ctx)
        model_sources = peak_labels.label(
            peaks, ctx.envelope_sources(), shaft=ctx.shaft,
            tolerance_hz=res.spectrum.resolution_hz, tolerance_pct=args.tolerance_pct)
        labels = {p.line: m[0]["name"] for p, m in zip(peaks, model_sources) if m}
    elif ctx is not None and ctx.shaft_rpm:
        label_warnings.append(f"{ctx.origin} has no bearing on the "
                              f"{ctx.shaft or 'reference'} shaft; envelope peaks are not "
                              "labelled")
    peak_list = [{**p.as_dict(), "source": labels.get(p.line)} for p in peaks]
    if model_sources is not None:
        for p, srcs in zip(peak_list, model_sources):
            p["sources"] = srcs
    warnings = ch.warnings() + list(res.warnings) + list(res.spectrum.warnings) \
        + label_warnings
    if args.json:
        d = res.spectrum.as_dict()
        d.update(source=ch.source, band_hz=list(res.band_hz), auto=res.auto,
                 kurtosis_in_band=res.kurtosis_in_band, peaks=peak_list, defects=defects,
                 warnings=warnings)
        if model_sources is not None:
            d["labels"] = {**ctx.as_dict(), "tolerance_pct": args.tolerance_pct,
                           "tolerance_hz": res.spectrum.resolution_hz,
                           "bearings": [b.label for b in ctx.bearings_on_shaft()]}
        emit_json(d)
        return 0
    lo, hi = res.band_hz
    print_pairs([("file", ch.source), ("band", f"{lo:.0f}–{hi:.0f} Hz"
                                       + (" (fast kurtogram)" if res.auto else "")),
                 ("kurtosis in band", res.kurtosis_in_band),
                 ("envelope spectrum", f"g {res.spectrum.scale}, Fmax "
                                       f"{res.spectrum.fmax_hz:g} Hz")])
    print()
    print_table(["#", "frequency Hz", "amplitude g", "order", "source"],
                [[i, p["frequency_hz"], p["amplitude"],
                  f"{p['order']:.3f}×" if "order" in p else "—", p["source"] or ""]
                 for i, p in enumerate(peak_list, 1)])
    if defects:
        print()
        print_table(["defect", "Hz", "harmonics found", "amplitude g", "SNR dB"],
                    [[m["name"], m["frequency_hz"], m["harmonics_found"], m["amplitude"],
                      m["snr_db"]] for m in defects])
    print_warnings(warnings)
    return 0


def _model_defects(spectrum, ctx) -> list[dict]:
    """Defect matches of the bearings on the point's shaft (names like "pump DE BPFO"),
    each at the speed of its shaft."""
    targets = {}
    for b in ctx.bearings_on_shaft():
        hz = defect_frequencies_hz(b.geometry, ctx.reference_rpm * ctx.model.ratio(b.shaft))
        targets.update({f"{b.label} {k.upper()}": hz[k] for k in DEFECTS})
    return [{"name": m.name, "frequency_hz": m.frequency_hz,
             "harmonics_found": m.harmonics_found, "amplitude": m.amplitude,
             "snr_db": m.snr_db} for m in defect_matches(spectrum, targets)]


def _tach(args: argparse.Namespace, ch) -> tuple:
    rec = ch.recording
    tach_ch = rec.channel(args.tach_channel)
    if args.tach_channel == ch.index:
        raise InputError(f"{ch.source}: the tachometer channel must differ from the "
                         f"analysed channel ({ch.index})")
    return detect_pulses(tach_ch.samples, rec.fs_hz, pulses_per_rev=args.pulses_per_rev,
                         edge=args.edge, source=ch.source)


def run_orders(args: argparse.Namespace) -> int:
    ch = load_channel(args)
    tach = _tach(args, ch)
    if args.cut is not None:
        rpm, amp = order_cut(ch.samples, ch.fs_hz, tach, args.cut, source=ch.source)
        d = {"order": args.cut, "rpm": rpm.tolist(), "amplitude": amp.tolist(),
             "unit": ch.unit, "tach_warnings": list(tach.warnings)}
        if args.json:
            emit_json(d)
            return 0
        k = int(np.argmax(amp))
        print(f"order {args.cut:g}× cut: {rpm.size} points, {rpm.min():.0f}–{rpm.max():.0f} "
              f"rpm; largest {fmt(amp[k])} {ch.unit} at {rpm[k]:.0f} rpm")
        print_warnings(list(tach.warnings))
        return 0
    os_ = order_spectrum(ch.samples, ch.fs_hz, tach, max_order=args.max_order,
                         order_resolution=args.order_resolution, unit=ch.unit,
                         source=ch.source)
    a = np.asarray(os_.amplitude)
    idx = np.argsort(a)[::-1]
    peaks, used = [], np.zeros(a.size, bool)
    for i in idx:  # local maxima, largest first
        if len(peaks) >= args.peaks:
            break
        if 0 < i < a.size - 1 and a[i] >= a[i - 1] and a[i] >= a[i + 1] and not used[i]:
            peaks.append({"order": float(os_.order[i]), "amplitude": float(a[i])})
            used[max(0, i - 2):i + 3] = True
    d = {"order": np.asarray(os_.order).tolist(), "amplitude": a.tolist(), "peaks": peaks,
         "rpm_min": os_.rpm_min, "rpm_max": os_.rpm_max, "unit": os_.unit,
         "scale": os_.scale, "order_resolution": os_.order_resolution,
         "tach_warnings": list(tach.warnings) + list(os_.warnings)}
    if args.json:
        emit_json(d)
        return 0
    print_pairs([("file", ch.source), ("speed", f"{os_.rpm_min:.0f}–{os_.rpm_max:.0f} rpm"),
                 ("order resolution", f"{os_.order_resolution:g}"),
                 ("revolutions", f"{os_.revolutions:.1f}")])
    print()
    print_table(["#", "order", f"amplitude {os_.unit} {os_.scale}"],
                [[i, f"{p['order']:.3f}×", p["amplitude"]] for i, p in enumerate(peaks, 1)])
    print_warnings(d["tach_warnings"])
    return 0


def run_speed(args: argparse.Namespace) -> int:
    ch = load_channel(args)
    est = estimate_speed(ch.samples, ch.fs_hz, near_rpm=args.near_rpm, source=ch.source)
    d = {"rpm": est.rpm, "confidence": est.confidence, "method": est.method,
         "source": ch.source}
    if args.json:
        emit_json(d)
        return 0
    print_pairs([("file", ch.source), ("estimated speed", f"{est.rpm:.1f} rpm"),
                 ("confidence", f"{est.confidence:.2f} (0 … 1)"), ("method", est.method)])
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("bearing", help="bearing defect frequencies from geometry",
                       description="FTF, BSF, 2×BSF, BPFO and BPFI from bearing geometry, "
                                   "as orders of shaft speed and in Hz at --rpm.")
    add_geometry_options(p, required=True)
    p.add_argument("--rpm", type=float, metavar="R", help="shaft speed, rev/min")
    add_json_option(p)
    p.set_defaults(func=run_bearing)

    p = sub.add_parser("envelope", help="envelope (demodulated) spectrum for bearings",
                       description="Band-pass, Hilbert demodulation and the envelope "
                                   "spectrum in g; band by hand or by the fast kurtogram. "
                                   "Peaks are matched to the defect lines of the geometry "
                                   "options, or, without them, to the bearings on the "
                                   "point's shaft in the machine model (--archive/--run "
                                   "or --machine-file).")
    add_input_options(p)
    p.add_argument("--band", type=float, nargs=2, metavar=("LO", "HI"),
                   help="demodulation band, Hz")
    p.add_argument("--auto", action="store_true",
                   help="choose the band with the fast kurtogram (the default)")
    p.add_argument("--fmax", type=float, default=500.0, metavar="HZ",
                   help="Fmax of the envelope spectrum (default 500 Hz)")
    p.add_argument("--lines", type=int, default=800, metavar="N",
                   help="lines of the envelope spectrum (default 800)")
    p.add_argument("--peaks", type=int, default=10, metavar="K", help="peaks listed")
    add_geometry_options(p, required=False)
    peak_labels.add_model_options(p, tolerance_pct=2.0, why="slip of rolling elements, "
                                                             "Randall & Antoni 2011")
    add_json_option(p)
    p.set_defaults(func=run_envelope, point_settings=False)  # its own Fmax and lines

    p = sub.add_parser("orders", help="order spectrum or order cut from a tachometer channel",
                       description="Computed order tracking: resample to constant shaft "
                                   "angle with the tachometer pulses, then the order "
                                   "spectrum, or one order's amplitude against rpm.")
    add_input_options(p)
    p.add_argument("--tach-channel", type=int, required=True, metavar="N",
                   help="channel with the tachometer pulses")
    p.add_argument("--pulses-per-rev", type=int, default=1, metavar="P")
    p.add_argument("--edge", choices=("rising", "falling"), default="rising")
    p.add_argument("--max-order", type=float, default=20.0, metavar="O")
    p.add_argument("--order-resolution", type=float, default=0.05, metavar="R")
    p.add_argument("--cut", type=float, metavar="ORDER",
                   help="give this order's amplitude against rpm instead")
    p.add_argument("--peaks", type=int, default=10, metavar="K")
    add_json_option(p)
    p.set_defaults(func=run_orders)

    p = sub.add_parser("speed", help="shaft speed estimated from the vibration (no tach)",
                       description="Speed from the vibration itself by a harmonic-sum "
                                   "search; --near-rpm narrows the search.")
    add_input_options(p)
    p.add_argument("--near-rpm", type=float, metavar="R", help="expected speed, rev/min")
    add_json_option(p)
    p.set_defaults(func=run_speed)
