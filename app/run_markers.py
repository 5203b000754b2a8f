"""Source markers of a run: which of the machine's source frequencies are marked on the
spectrum and on the envelope spectrum, and with which short labels."""

from __future__ import annotations

from .plots import Marker, XAxis
from .run_compute import RunAnalysis, marker_kind

DEFAULT_MARKER_KINDS = ("order", "bearing")
#: Orders of the point's shaft marked on the envelope spectrum (its modulation lines).
ENVELOPE_ORDERS = ("1×", "2×", "3×")


def short_label(src, setup) -> str:
    """A marker's label without the point's own shaft or bearing in front ("1×" for
    "pump 1×", "BPFO" for "pump DE BPFO"); other shafts' sources keep their full name."""
    model = setup.model
    prefixes = [setup.shaft + " "] if setup.shaft else []
    if model is not None:
        prefixes += [b.label + " " for b in model.bearings if b.shaft == setup.shaft]
    for p in sorted(prefixes, key=len, reverse=True):
        if src.name.startswith(p):
            return src.name[len(p):]
    return src.name


def source_markers(a: RunAnalysis, axis: XAxis) -> list[Marker]:
    """Markers of a run's sources up to the spectrum's Fmax, one per frequency and
    label (two bearings of the same geometry on a shaft give one marker)."""
    out, seen = [], set()
    for src in a.sources:
        if src.frequency_hz > a.spectrum.fmax_hz:
            continue
        label = short_label(src, a.setup)
        key = (round(src.frequency_hz, 3), label)
        if key in seen:
            continue
        seen.add(key)
        out.append(Marker(src.frequency_hz, label, marker_kind(src),
                          sideband=src.kind == "sideband",
                          tooltip=f"{src.name}: {axis.text(src.frequency_hz)}"))
    return out


def envelope_markers(spectrum_markers: list[Marker], fmax_hz: float) -> list[Marker]:
    """The markers the envelope spectrum shows up to its Fmax: bearing defect lines
    (with harmonics and sidebands) and the first orders of the point's shaft."""
    return [m for m in spectrum_markers if m.frequency_hz <= fmax_hz
            and (m.kind == "bearing" or m.label in ENVELOPE_ORDERS)]
