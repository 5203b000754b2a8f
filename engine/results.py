"""What the analysis of one run produces, kept beside the run in the archive.

A :class:`RunResults` holds the run's velocity spectrum and envelope spectrum (computed
with the point's settings), the named values that trends and alarm bands read, the
labelled peaks and the findings.  The alarm state is not part of it: states follow from
the values and the plan in force (``engine.alarms.evaluate``) and are kept in the
archive's value table, so that changing a plan never rewrites a run's results.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # engine.spectrum pulls in scipy.signal, which readers of results skip
    from .spectrum import Spectrum

#: Standard values computed for every run (units in the names; NaN when not measurable).
STANDARD_VALUES = ("overall_velocity_mm_s", "1x_mm_s", "2x_mm_s", "3x_mm_s",
                   "half_x_mm_s", "acceleration_rms_g", "acceleration_peak_g",
                   "envelope_rms_g", "ftf_g", "bsf_g", "bpfo_g", "bpfi_g",
                   "crest_factor", "kurtosis", "rpm")
#: Units of the standard values (for trend axes and CSV headers).
VALUE_UNITS = {"overall_velocity_mm_s": "mm/s RMS", "1x_mm_s": "mm/s RMS",
               "2x_mm_s": "mm/s RMS", "3x_mm_s": "mm/s RMS", "half_x_mm_s": "mm/s RMS",
               "acceleration_rms_g": "g RMS", "acceleration_peak_g": "g 0-peak",
               "envelope_rms_g": "g RMS", "ftf_g": "g RMS", "bsf_g": "g RMS",
               "bpfo_g": "g RMS", "bpfi_g": "g RMS", "crest_factor": "1", "kurtosis": "1",
               "rpm": "rev/min"}
#: Prefix of the values of a plan's bands: ``band:<band name>``.
BAND_PREFIX = "band:"


def band_value_name(band_name: str) -> str:
    return BAND_PREFIX + band_name


@dataclass
class RunResults:
    """The analysis of one run.

    Attributes
    ----------
    run_id, point : str
    taken_s, rpm : float
        Time taken (s since 1970 UTC) and the point's shaft speed (rev/min; NaN unknown).
    settings : dict
        Analysis settings used (spectrum and envelope), for the record and for
        ``engine.batch`` to know when results are out of date.
    spectrum : Spectrum or None
        Velocity spectrum, mm/s RMS, with the point's settings.
    envelope : Spectrum or None
        Envelope spectrum, g RMS; ``envelope_band_hz`` its demodulation band.
    values : dict of str to float
        :data:`STANDARD_VALUES` and ``band:<name>`` for each band of the plan in force.
    labelled_peaks : list of dict
        ``{"frequency_hz", "amplitude", "order", "sources": [{"name", "kind",
        "frequency_hz", "error_hz"}]}``, largest first.
    envelope_peaks : list of dict
        Same shape, of the envelope spectrum.
    findings : list of dict
        ``engine.findings.Finding.as_dict()`` of each finding, most severe first.
    quality : str
        The run's data-quality state (``ok``, ``warning``, ``error``).
    plan_digest : str
        Digest of the plan whose band values are in ``values`` (``""``: none).
    state, zone, bands : str, str, list of dict
        Filled when read from an archive: the alarm state, the ISO 20816 zone of the
        overall velocity, and the per-band states (``band``, ``value``, ``state``,
        ``level``, ``excess``).
    """

    run_id: str
    point: str
    taken_s: float
    rpm: float = math.nan
    settings: dict = field(default_factory=dict)
    spectrum: Spectrum | None = None
    envelope: Spectrum | None = None
    envelope_band_hz: tuple[float, float] | None = None
    values: dict[str, float] = field(default_factory=dict)
    labelled_peaks: list[dict] = field(default_factory=list)
    envelope_peaks: list[dict] = field(default_factory=list)
    findings: list[dict] = field(default_factory=list)
    quality: str = "ok"
    plan_digest: str = ""
    state: str = ""
    zone: str = ""
    bands: list[dict] = field(default_factory=list)

    def value(self, name: str) -> float:
        return float(self.values.get(name, math.nan))

    def summary(self) -> dict:
        """A JSON-able summary (no spectra)."""
        return {"run_id": self.run_id, "point": self.point, "taken_s": self.taken_s,
                "rpm": None if math.isnan(self.rpm) else self.rpm, "state": self.state,
                "zone": self.zone, "quality": self.quality,
                "values": {k: (None if math.isnan(v) else v) for k, v in self.values.items()},
                "bands": self.bands, "findings": self.findings,
                "envelope_band_hz": list(self.envelope_band_hz) if self.envelope_band_hz else None}
