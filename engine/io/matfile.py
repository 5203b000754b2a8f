"""Reading MATLAB .mat files: v4–v7 through scipy.io, v7.3 (HDF5) through h5py.

A .mat file holds named variables; one numeric array is the signal.  The sample rate
and the shaft speed come from scalar variables beside it when the file has them.

MATLAB v7.3 files are HDF5 files with a 512-byte user block; MATLAB writes arrays in
column-major order, so h5py sees every array transposed (an N×1 MATLAB vector is a
1×N dataset) and each dataset carries a ``MATLAB_class`` attribute.  This reader
transposes back, so both versions give arrays in MATLAB's own row × column order.

References
----------
.. [1] The MathWorks, MAT-File Format (Level 5), and "MAT-file versions": v7.3 files
   use HDF5 (from memory).
"""

from __future__ import annotations

import os
import re
import struct
import warnings
import zlib
from dataclasses import dataclass

import numpy as np

from ..errors import EngineWarning, InputError
from ..recording import Channel, Recording
from ..units import unit

#: Fewest elements a numeric array needs to be taken for a signal automatically.
MIN_SIGNAL_SAMPLES = 16
#: MATLAB classes that hold numbers.
NUMERIC_CLASSES = frozenset({"double", "single", "int8", "uint8", "int16", "uint16",
                             "int32", "uint32", "int64", "uint64"})
#: Names (lower case, without ``_`` or spaces) of a scalar variable holding the sample
#: rate in Hz: fs, Fs, sample_rate, sampling_rate, SampleRate, ...
SAMPLE_RATE_NAMES = frozenset({"fs", "fshz", "samplerate", "sampleratehz", "samplingrate",
                               "samplingratehz", "samplingfrequency", "samplefrequency"})
_HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"
# scipy.io raises several exception types for damaged files (NotImplementedError for
# a v7.3 file it cannot read, should one escape the HDF5 signature test).
_SCIPY_ERRORS = (ValueError, TypeError, OSError, NotImplementedError, KeyError, EOFError,
                 IndexError, zlib.error, struct.error)


@dataclass(frozen=True)
class _Variable:
    name: str
    shape: tuple[int, ...]  # MATLAB's order (rows, columns, ...)
    kind: str  # MATLAB class, or "group" / "unknown"
    numeric: bool

    @property
    def size(self) -> int:
        return int(np.prod(self.shape)) if self.shape else 1


def read_mat(path: str | os.PathLike, *, variable: str | None = None,
             sample_rate_hz: float | None = None, input_unit: str = "g") -> Recording:
    """Read one numeric variable of a .mat file as a recording.

    Parameters
    ----------
    path : str or path-like
    variable : str, optional, keyword-only
        Name of the signal variable.  Default: the only numeric array of at least
        :data:`MIN_SIGNAL_SAMPLES` elements.
    sample_rate_hz : float, optional, keyword-only
        Sample rate, Hz.  Default: a scalar variable named like ``fs``, ``Fs``,
        ``sample_rate``, ``sampling_rate`` or ``SampleRate`` (:data:`SAMPLE_RATE_NAMES`).
    input_unit : str, keyword-only
        Unit of the stored values (see :mod:`engine.units`); values are not rescaled.

    Returns
    -------
    Recording
        N×1 and 1×N vectors give one channel named after the variable; an N×C array
        with N > C gives C channels (columns), a C×N array with C < N gives C channels
        (rows), named ``<variable>_1``, ... .  ``rpm`` is set from a scalar variable
        whose name ends with ``RPM`` (any case) when there is one.

    Raises
    ------
    InputError
        When the file cannot be read, the variable cannot be chosen (the message lists
        the candidates), the array is not real 1-D/2-D numeric, or no sample rate is
        known ("give --sample-rate").
    """
    src = str(path)
    symbol = unit(input_unit, source=src, field="input unit").symbol
    if sample_rate_hz is not None:
        sample_rate_hz = _positive(sample_rate_hz, "sample rate (Hz)", src)
    v73 = _is_hdf5(path)
    listing = _list_h5(path, src) if v73 else _list_v5(path, src)
    chosen = _choose(listing, variable, src)
    scalars = [v for v in listing if v.numeric and v.size == 1]
    fs_vars = [v for v in scalars if _normalise(v.name) in SAMPLE_RATE_NAMES]
    rpm_vars = [v for v in scalars if v.name.lower().endswith("rpm")]
    names = list(dict.fromkeys([chosen.name] + [v.name for v in fs_vars + rpm_vars]))
    values = _load_h5(path, src, names) if v73 else _load_v5(path, src, names)

    columns = _columns(values[chosen.name], chosen.name, src)
    fs_found = _scalar_values(values, fs_vars)
    if sample_rate_hz is not None:
        fs = sample_rate_hz
        if fs_found and any(abs(v - fs) > 1e-9 * fs for v in fs_found.values()):
            warnings.warn(f"{src}: sample rate {fs:g} Hz given; the file's "
                          f"{', '.join(fs_found)} says {list(fs_found.values())[0]:g} Hz "
                          "(the value given is used)", EngineWarning, stacklevel=2)
    else:
        if not fs_found:
            raise InputError(
                f"{src}: no sample rate in the file (looked for a scalar variable named "
                "fs, Fs, sample_rate, sampling_rate or SampleRate); give --sample-rate")
        if len(set(fs_found.values())) > 1:
            raise InputError(f"{src}: the file's sample-rate variables disagree ("
                             + ", ".join(f"{k} = {v:g}" for k, v in fs_found.items())
                             + "); give --sample-rate")
        fs = _positive(next(iter(fs_found.values())), next(iter(fs_found)), src)

    rpm = None
    rpm_found = {k: v for k, v in _scalar_values(values, rpm_vars).items()
                 if np.isfinite(v) and v > 0}
    if len(set(rpm_found.values())) == 1:
        rpm = next(iter(rpm_found.values()))
    elif len(rpm_found) > 1:
        warnings.warn(f"{src}: several speeds in the file ("
                      + ", ".join(f"{k} = {v:g}" for k, v in rpm_found.items())
                      + "); none is used", EngineWarning, stacklevel=2)

    if len(columns) == 1:
        channels = [Channel(samples=columns[0], unit=symbol, name=chosen.name)]
    else:
        channels = [Channel(samples=c, unit=symbol, name=f"{chosen.name}_{j + 1}")
                    for j, c in enumerate(columns)]
    return Recording(fs_hz=fs, channels=channels, source=src, rpm=rpm)


def _positive(value, field: str, src: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        x = float("nan")
    if not (np.isfinite(x) and x > 0):
        raise InputError(f"{src}: {field} must be a positive number, got {value!r}")
    return x


def _normalise(name: str) -> str:
    return re.sub(r"[\s_]", "", name).lower()


def _is_hdf5(path) -> bool:
    """True for a v7.3 file: the HDF5 signature at 0 or after MATLAB's 512-byte block."""
    try:
        with open(path, "rb") as f:
            head = f.read(520)
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror or exc})") from exc
    return head[:8] == _HDF5_SIGNATURE or head[512:520] == _HDF5_SIGNATURE


def _list_v5(path, src: str) -> list[_Variable]:
    import scipy.io

    try:
        entries = scipy.io.whosmat(path)
    except _SCIPY_ERRORS as exc:
        raise InputError(f"{src}: not a readable MATLAB .mat file ({exc})") from exc
    return [_Variable(name, tuple(int(s) for s in shape), cls, cls in NUMERIC_CLASSES)
            for name, shape, cls in entries]


def _load_v5(path, src: str, names: list[str]) -> dict[str, np.ndarray]:
    import scipy.io

    try:
        data = scipy.io.loadmat(path, variable_names=names)
    except _SCIPY_ERRORS as exc:
        raise InputError(f"{src}: variables {', '.join(names)} cannot be read ({exc})") from exc
    return {n: np.asarray(data[n]) for n in names}


def _list_h5(path, src: str) -> list[_Variable]:
    import h5py

    out = []
    try:
        with h5py.File(path, "r") as f:
            for name, obj in f.items():
                if name.startswith("#"):  # '#refs#', '#subsystem#': MATLAB's internals
                    continue
                if not isinstance(obj, h5py.Dataset):
                    out.append(_Variable(name, (), "group", False))
                    continue
                cls = obj.attrs.get("MATLAB_class", b"")
                cls = cls.decode() if isinstance(cls, bytes) else str(cls)
                empty = bool(obj.attrs.get("MATLAB_empty", 0))
                numeric = (obj.dtype.kind in "iuf" and obj.dtype.names is None
                           and (cls == "" or cls in NUMERIC_CLASSES) and not empty)
                out.append(_Variable(name, tuple(reversed(obj.shape)), cls or "unknown",
                                     numeric))
    except OSError as exc:
        raise InputError(f"{src}: not a readable MATLAB v7.3 (HDF5) file ({exc})") from exc
    return out


def _load_h5(path, src: str, names: list[str]) -> dict[str, np.ndarray]:
    import h5py

    try:
        with h5py.File(path, "r") as f:
            # MATLAB writes column-major: transpose back to MATLAB's row × column order.
            return {n: np.asarray(f[n][()]).T for n in names}
    except (OSError, KeyError) as exc:
        raise InputError(f"{src}: variables {', '.join(names)} cannot be read ({exc})") from exc


def _describe(v: _Variable) -> str:
    return f"{v.name} ({'×'.join(map(str, v.shape)) or 'group'} {v.kind})"


def _choose(listing: list[_Variable], variable: str | None, src: str) -> _Variable:
    signals = [v for v in listing if v.numeric and v.size >= MIN_SIGNAL_SAMPLES
               and len(v.shape) <= 2]
    everything = ", ".join(_describe(v) for v in listing) or "none"
    if variable is not None:
        match = [v for v in listing if v.name == variable]
        if not match:
            raise InputError(f"{src}: no variable named {variable!r}; signal candidates: "
                             + (", ".join(v.name for v in signals) or "none")
                             + f" (all variables: {everything})")
        chosen = match[0]
        if not chosen.numeric:
            raise InputError(f"{src}: variable {variable!r} is {chosen.kind}, not a real "
                             "numeric array")
        return chosen
    if len(signals) == 1:
        return signals[0]
    if not signals:
        raise InputError(f"{src}: no numeric array of at least {MIN_SIGNAL_SAMPLES} "
                         f"samples to take as the signal (variables: {everything})")
    raise InputError(f"{src}: several variables could be the signal: "
                     + ", ".join(v.name for v in signals)
                     + "; choose one with --variable")


def _columns(array: np.ndarray, name: str, src: str) -> list[np.ndarray]:
    """Split a MATLAB-ordered array into float64 channels (the longer axis is time)."""
    a = np.asarray(array)
    if np.iscomplexobj(a) or a.dtype.kind not in "iuf":
        raise InputError(f"{src}: variable {name!r} holds {a.dtype} values; expected real "
                         "numbers")
    if a.ndim == 0:
        a = a.reshape(1, 1)
    elif a.ndim == 1:
        a = a[:, np.newaxis]
    elif a.ndim > 2:
        raise InputError(f"{src}: variable {name!r} is {'×'.join(map(str, a.shape))}; "
                         "expected a vector or a samples × channels matrix")
    rows, cols = a.shape
    if rows == 1 or cols == 1:
        return [np.ascontiguousarray(a.reshape(-1), dtype=np.float64)]
    if rows > cols:
        return [np.ascontiguousarray(a[:, j], dtype=np.float64) for j in range(cols)]
    if cols > rows:
        return [np.ascontiguousarray(a[j, :], dtype=np.float64) for j in range(rows)]
    raise InputError(f"{src}: variable {name!r} is square ({rows}×{cols}); expected more "
                     "samples than channels, so that the time axis is clear")


def _scalar_values(values: dict[str, np.ndarray], variables: list[_Variable]
                   ) -> dict[str, float]:
    return {v.name: float(np.asarray(values[v.name]).reshape(-1)[0]) for v in variables}
