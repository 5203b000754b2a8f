"""Peaks tied to a machine model's sources, for ``spectrum``, ``envelope`` and ``diagnose``.

A command labels peaks when it knows a machine model: the run's machine model (with
``--archive ARCHIVE --run RUN_ID``) or a model file (``--machine-file MODEL.json``,
the JSON of ``engine.kinematics.MachineModel.as_dict``; see ``shaftwatch model
--help``).  The shaft speed works as in the archive: ``--rpm`` (or the run's stored
speed) is the speed of the model's *reference* shaft (ratio 1.0, usually the motor);
the point's shaft (``--shaft``, or the point's shaft in the archive) turns at
``rpm × ratio`` and the peaks' orders are orders of that shaft.

A peak matches a source when ``|f_peak − f_source|`` is at most the larger of
``tolerance_pct`` of the source's frequency (1 %: speed uncertainty, common practice;
2 % in the envelope spectrum for the slip of rolling elements, Randall & Antoni 2011)
and one line of the spectrum.  Matches are listed closest first; between sources at the
same frequency (two shafts at ratio 1.0), those of the point's shaft come first.
"""

from __future__ import annotations

import argparse
import json
import math
from dataclasses import dataclass
from pathlib import Path

from ..bearings import FAMILIES
from ..errors import InputError
from ..kinematics import (SOURCE_KINDS, BearingAt, MachineModel, Source, label_peaks,
                          sources)


#: Harmonics of each source listed for the envelope spectrum: an outer-race defect shows
#: a long series of BPFO harmonics (Randall & Antoni 2011); the closest match wins.
ENVELOPE_HARMONICS = 10


def add_model_options(p: argparse.ArgumentParser, *, tolerance_pct: float,
                      why: str) -> None:
    """``--machine-file``, ``--shaft`` and ``--tolerance-pct`` (default ``tolerance_pct``)."""
    g = p.add_argument_group(
        "machine model (peak labels)",
        "Peaks are tied to the sources of a machine model: the run's machine model with "
        "--archive/--run, or a model file. With a model, --rpm (or the run's stored "
        "speed) is the speed of the model's reference shaft (ratio 1.0), as runs in an "
        "archive store it; orders are orders of the point's shaft.")
    g.add_argument("--machine-file", metavar="MODEL.json",
                   help="machine model file (the JSON that 'shaftwatch model --export' "
                        "writes); with --archive/--run it replaces the machine's model")
    g.add_argument("--shaft", metavar="S",
                   help="shaft of the point (default: the point's shaft in the archive, "
                        "else the model's reference shaft, the first of ratio 1.0)")
    g.add_argument("--tolerance-pct", type=float, default=tolerance_pct, metavar="PCT",
                   help=f"match tolerance, %% of the source frequency, at least one line "
                        f"(default {tolerance_pct:g} %%: {why})")


def read_model_file(path: str | Path) -> MachineModel:
    """The machine model in a JSON file (``MachineModel.as_dict``).

    Raises
    ------
    InputError
        When the file cannot be read, is not JSON, or a field is wrong; the message
        names the file and the field (``model.json: machine model: gears[0].driver_teeth
        must be …``).
    """
    src = str(path)
    try:
        text = Path(path).read_text(encoding="utf-8")
    except OSError as exc:
        raise InputError(f"{src}: cannot read the machine model file "
                         f"({exc.strerror or exc})") from None
    except UnicodeDecodeError as exc:
        raise InputError(f"{src}: not UTF-8 text (byte {exc.start})") from None
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"{src}: not valid JSON at line {exc.lineno} column {exc.colno}: "
                         f"{exc.msg}") from None
    return MachineModel.from_dict(data, source=src)


def reference_shaft(model: MachineModel) -> str:
    """The model's first shaft of ratio 1.0 (the reference shaft), else ``""``."""
    for name, ratio in model.ratios.items():
        if math.isclose(ratio, 1.0, rel_tol=1e-9):
            return name
    return ""


@dataclass
class ModelContext:
    """A machine model, the point's shaft on it and the speed.

    Attributes
    ----------
    model : MachineModel
    shaft : str
        The point's shaft (``""``: none known; orders are then of the reference speed).
    reference_rpm : float or None
        Speed of the reference shaft (ratio 1.0), rev/min; ``None`` when unknown.
    origin : str
        Where the model came from, for messages (a file, or ``"machine S/M"``).
    location : str
        The point's location (its bearing's label in the model), ``""`` when unknown.
    """

    model: MachineModel
    shaft: str
    reference_rpm: float | None
    origin: str
    location: str = ""

    @property
    def ratio(self) -> float:
        """Speed of the point's shaft / reference speed (1.0 without a shaft)."""
        return self.model.ratio(self.shaft) if self.shaft else 1.0

    @property
    def shaft_rpm(self) -> float | None:
        """Speed of the point's shaft, rev/min."""
        return None if self.reference_rpm is None else self.reference_rpm * self.ratio

    def bearings_on_shaft(self) -> list[BearingAt]:
        """The model's bearings on the point's shaft (all of them without a shaft); the
        one at the point's location first."""
        out = [b for b in self.model.bearings if not self.shaft or b.shaft == self.shaft]
        return sorted(out, key=lambda b: b.label != self.location)

    def sources(self, *, harmonics: int = 3) -> list[Source]:
        """Every source of the model at the speed (empty without a speed)."""
        if self.reference_rpm is None:
            return []
        return sources(self.model, self.reference_rpm, harmonics=harmonics)

    def envelope_sources(self) -> list[Source]:
        """What an envelope spectrum shows: the point's shaft orders (up to 3×), and of
        the bearings on the point's shaft FTF (up to 3×) and the BSF, BPFO and BPFI lines
        (up to :data:`ENVELOPE_HARMONICS`) with their sidebands.  Higher FTF harmonics
        are left out: n × FTF is BPFO exactly ([1]_ in :mod:`engine.bearings`)."""
        def on_shaft(s: Source) -> bool:
            # A bearing's lines and sidebands carry its shaft (kinematics.sources).
            return (s.kind == "order" or s.family in FAMILIES) \
                and (not self.shaft or s.shaft == self.shaft)

        out = {s.name: s for s in self.sources(harmonics=3) if on_shaft(s)}
        for s in self.sources(harmonics=ENVELOPE_HARMONICS):
            if s.kind != "order" and s.family != "FTF" and on_shaft(s):
                out.setdefault(s.name, s)
        return sorted(out.values(), key=lambda s: (s.frequency_hz, SOURCE_KINDS.index(s.kind)))

    def as_dict(self) -> dict:
        return {"model": self.origin, "shaft": self.shaft or None,
                "reference_rpm": self.reference_rpm, "shaft_rpm": self.shaft_rpm,
                "ratio": self.ratio}


def model_context(args: argparse.Namespace, rpm: float | None) -> tuple[ModelContext | None,
                                                                        list[str]]:
    """The machine model the command's options name, and warnings.

    ``rpm`` is the speed the input gave (``--rpm`` or the run's stored speed): the
    reference shaft's.  Returns ``(None, warnings)`` when no model applies (no
    ``--machine-file`` and no ``--archive``/``--run``, or the run's machine has no
    model).  Raises InputError for an unreadable model file, an unknown shaft, or a
    model file without a speed.
    """
    file = getattr(args, "machine_file", None)
    shaft = getattr(args, "shaft", None)
    in_archive = bool(getattr(args, "archive", None) and getattr(args, "run", None))
    warnings: list[str] = []
    point_shaft, location, model, origin = "", "", None, ""
    if in_archive:
        machine = ""
        from ..archive import open_archive

        with open_archive(args.archive) as arc:
            point = arc.point(arc.run_info(arc.resolve_run(args.run)).point)
            machine = f"{point.site}/{point.machine}"
            if file is None:
                model = arc.machine_model(point.site, point.machine)
                origin = f"machine {machine}"
            point_shaft = arc.point_shaft(point.path)
            location = str(point.props.get("location") or "")
        if model is None and file is None:
            # Not asked for: a run of a machine without a model is shown unlabelled.
            if shaft:
                raise InputError(f"--shaft {shaft!r}: machine {machine} has no machine "
                                 "model; store one with 'shaftwatch model' or give "
                                 "--machine-file")
            return None, warnings
    if file is not None:
        model, origin = read_model_file(file), str(file)
    if model is None:
        if shaft:
            raise InputError(f"--shaft {shaft!r} needs a machine model: give "
                             "--machine-file MODEL.json, or --archive and --run")
        return None, warnings
    if shaft:
        model.ratio(shaft)  # InputError naming the model's shafts
    elif point_shaft and point_shaft in model.ratios:
        shaft = point_shaft
    else:
        shaft = reference_shaft(model)
        if point_shaft:
            warnings.append(f"{origin} has no shaft {point_shaft!r} (the point's); orders "
                            f"are of the {shaft or 'reference'} shaft (give --shaft)")
    if rpm is None:
        if file is not None:
            raise InputError(f"{file}: labelling peaks needs the speed of the model's "
                             "reference shaft: give --rpm")
        warnings.append("the run has no stored speed; peaks are not labelled (give --rpm)")
    return ModelContext(model, shaft, rpm, origin, location), warnings


def check_tolerance(pct: float) -> float:
    """``--tolerance-pct`` as given, or InputError when it is not 0 … 50."""
    if not (isinstance(pct, (int, float)) and math.isfinite(pct) and 0.0 <= pct <= 50.0):
        raise InputError(f"--tolerance-pct must be a number from 0 to 50, got {pct}")
    return float(pct)


def label(peaks, srcs: list[Source], *, shaft: str, tolerance_hz: float,
          tolerance_pct: float) -> list[list[dict]]:
    """Per peak, the sources within tolerance as ``{"name", "kind", "frequency_hz",
    "error_hz"}`` (``error_hz = peak − source``), closest first; at equal distance the
    sources of ``shaft`` first."""
    out = []
    for lp in label_peaks(peaks, srcs, tolerance_hz=tolerance_hz,
                          tolerance_pct=check_tolerance(tolerance_pct)):
        matches = sorted(lp.matches, key=lambda m: (abs(m[1]), m[0].shaft != shaft))
        out.append([{"name": s.name, "kind": s.kind, "frequency_hz": s.frequency_hz,
                     "error_hz": e} for s, e in matches])
    return out


def names(sources_of_peak: list[dict], most: int = 3) -> str:
    """A table cell: the first ``most`` source names, then ``+N``."""
    shown = [s["name"] for s in sources_of_peak[:most]]
    extra = len(sources_of_peak) - len(shown)
    return ", ".join(shown) + (f" +{extra}" if extra > 0 else "")
