"""Measured responses in: a CSV magnitude (and phase) table or a mono WAV impulse response.

A measurement is named in a description by a path relative to the description
file (``measurement = "woofer.csv"``).  Two formats are read:

``.csv``  a header row ``frequency_hz,magnitude_db`` or
          ``frequency_hz,magnitude_db,phase_deg``, then one row per frequency:
          comma-separated numbers, frequencies above 0 Hz and strictly increasing,
          at least :data:`MIN_POINTS` rows.  Blank lines and ``#`` comments (whole
          lines or after the numbers) are allowed.
``.wav``  a mono impulse response (PCM or float) at the description's sample rate;
          its response is taken with an FFT at every bin from the first above 0 Hz
          to Nyquist.

Every problem is a :class:`MeasurementError` whose message names the file and,
for CSV, the line, and says what to change; the design layer places it at the
stage and key of the description (one line, exit code 2 from the CLI).

Fractional-octave smoothing (:func:`smooth_fractional_octave`) averages the
power (squared magnitude) over a window of constant width in octaves, on a
logarithmic frequency axis.

References
----------
P. D. Hatziantoniou & J. N. Mourjopoulos, "Generalized fractional-octave smoothing
of audio and acoustic responses", J. Audio Eng. Soc. 48(4), 259-280, 2000
(power spectral smoothing with a fractional-octave window).
J. G. Tylka, B. B. Boren & E. Y. Choueiri, "A generalized method for
fractional-octave smoothing of transfer functions that preserves log-frequency
symmetry", J. Audio Eng. Soc. 65(3), 239-245, 2017 (the method used here: the
spectrum interpolated to logarithmically spaced frequencies, then a window of fixed
width on that axis).
"""

from __future__ import annotations

import math
import os
import stat
from dataclasses import dataclass
from pathlib import Path, PurePath

import numpy as np

from ..errors import CoefcError

#: Fewest points a CSV measurement must have.
MIN_POINTS = 10
#: Most rows of a CSV measurement and most samples of a WAV impulse response
#: (the work one description can ask for is bounded).
MAX_POINTS = 200_000
#: Largest measurement file read, in bytes.
MAX_FILE_BYTES = 16 * 1024 * 1024
#: Largest magnitude accepted in a CSV row (a larger value is a unit or column mistake).
MAX_ABS_DB = 300.0
#: Points per octave of the logarithmic axis the smoothing works on.
SMOOTHING_POINTS_PER_OCTAVE = 96

CSV_HEADERS = (("frequency_hz", "magnitude_db"), ("frequency_hz", "magnitude_db", "phase_deg"))


class MeasurementError(CoefcError):
    """A measurement file cannot be used; the message names the file (and line) and the fix."""


@dataclass(frozen=True, eq=False)
class Measurement:
    """A measured response: frequencies (Hz, increasing) with magnitude (dB) and, if known, phase (degrees)."""

    path: str  # as shown in messages
    freqs_hz: np.ndarray
    magnitude_db: np.ndarray
    phase_deg: np.ndarray | None = None
    sha256: str = ""  # of the file's bytes (the header banner names each input file with it)

    def magnitude_at(self, freqs_hz) -> np.ndarray:
        """Magnitude in dB at *freqs_hz*, interpolated linearly in dB over log frequency.

        The frequencies must lie within the measured span (callers check it with
        :meth:`covers`).
        """
        f = np.asarray(freqs_hz, dtype=float)
        return np.interp(np.log(f), np.log(self.freqs_hz), self.magnitude_db)

    def covers(self, lo_hz: float, hi_hz: float) -> bool:
        """The measured span includes ``[lo_hz, hi_hz]`` (within 1e-9 relative)."""
        return self.freqs_hz[0] <= lo_hz * (1 + 1e-9) and self.freqs_hz[-1] >= hi_hz * (1 - 1e-9)


def resolve(description: str, name: str) -> tuple[Path, str]:
    """The file a description names by *name*, relative to the description's folder.

    Returns ``(path to open, path as shown in messages)``.  An absolute path is
    refused: a description and its measurements must move together (a repository,
    a build machine), so the measurement is named relative to the description.
    A description that is not a file (``<description>``) resolves against the
    current folder.
    """
    if not name.strip():
        raise MeasurementError("the file name is empty; name a .csv or .wav file relative to the description")
    if "\0" in name:
        raise MeasurementError(f"'{name!r}' contains a NUL character; name a file relative to the description")
    if PurePath(name).is_absolute() or (len(name) > 1 and name[1] == ":"):
        raise MeasurementError(f"{name}: an absolute path; name the file relative to the description's folder "
                               "(so the description and its measurements move together)")
    base = Path(description).parent if not description.startswith("<") else Path(".")
    path = base / name
    return path, str(path)


def _read_bytes(path: Path, shown: str, hint: str = "the path is relative to the description's folder") -> bytes:
    """The bytes of a measurement file (a regular file of at most MAX_FILE_BYTES); *hint* follows "file not found"."""
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise MeasurementError(f"{shown}: file not found; {hint}") from None
    except OSError as e:
        raise MeasurementError(f"{shown}: cannot read it ({e.strerror or e}); check the path") from None
    if stat.S_ISDIR(st.st_mode):
        raise MeasurementError(f"{shown}: is a directory; name a .csv or .wav file") from None
    if not stat.S_ISREG(st.st_mode):
        raise MeasurementError(f"{shown}: not a regular file (a pipe or device); name a .csv or .wav file")
    if st.st_size > MAX_FILE_BYTES:
        raise MeasurementError(f"{shown}: {st.st_size} bytes; a measurement may have at most {MAX_FILE_BYTES} "
                               "bytes: thin it out (a few hundred points per decade are plenty)")
    try:
        return path.read_bytes()
    except OSError as e:
        raise MeasurementError(f"{shown}: cannot read it ({e.strerror or e}); check the path") from None


def read_measurement(description: str, name: str, sample_rate_hz: float) -> Measurement:
    """Read the measurement *name* (``.csv`` or ``.wav``) of the description file *description*.

    Parameters
    ----------
    description : str
        The description's path as the user gave it (relative names resolve from its folder).
    name : str
        The file as the description names it.
    sample_rate_hz : float
        The description's sample rate: a WAV must have it, and CSV frequencies must lie below Nyquist.

    Raises
    ------
    MeasurementError
        One line naming the file (and line) and what to change.
    """
    path, shown = resolve(description, name)
    suffix = path.suffix.lower()
    if suffix not in (".csv", ".wav"):
        raise MeasurementError(f"{shown}: unsupported measurement format '{suffix or '(no suffix)'}'; give a .csv "
                               "table (frequency_hz,magnitude_db[,phase_deg]) or a mono .wav impulse response")
    import dataclasses
    import hashlib

    raw = _read_bytes(path, shown)
    m = parse_csv(raw, shown, sample_rate_hz) if suffix == ".csv" else parse_wav(raw, shown, sample_rate_hz)
    return dataclasses.replace(m, sha256=hashlib.sha256(raw).hexdigest())


def parse_csv(raw: bytes, shown: str, sample_rate_hz: float | None = None) -> Measurement:
    """A CSV measurement from its bytes (*shown* names it in messages); see the module docstring."""
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as e:
        raise MeasurementError(f"{shown}: not UTF-8 text (byte {e.start + 1}); save the file as UTF-8") from None
    header = None
    rows: list[tuple[float, ...]] = []
    for lineno, line in enumerate(text.splitlines(), start=1):
        body = line.split("#", 1)[0].strip()
        if not body:
            continue
        cells = [c.strip() for c in body.split(",")]
        where = f"{shown}, line {lineno}"
        if header is None:
            names = tuple(c.lower() for c in cells)
            if names not in CSV_HEADERS:
                raise MeasurementError(f"{where}: the first row must be the header frequency_hz,magnitude_db "
                                       f"(optionally ,phase_deg), got '{body[:60]}'; add or fix the header row")
            header = names
            continue
        if len(cells) != len(header):
            raise MeasurementError(f"{where}: {len(cells)} values, the header names {len(header)} "
                                   f"({','.join(header)}); give one value per column")
        values = []
        for col, cell in zip(header, cells):
            try:
                v = float(cell)
            except ValueError:
                raise MeasurementError(f"{where}: {col} '{cell[:30]}' is not a number; write a decimal "
                                       "number (e.g. 1000 or -3.5)") from None
            if not math.isfinite(v):
                raise MeasurementError(f"{where}: {col} is {cell}; every value must be a finite number "
                                       "(remove the row or fill in the measured value)")
            values.append(v)
        f = values[0]
        if f <= 0:
            raise MeasurementError(f"{where}: frequency_hz {f:g} must be above 0 Hz; remove the row")
        if sample_rate_hz is not None and f > sample_rate_hz / 2:
            raise MeasurementError(f"{where}: frequency_hz {f:g} is above Nyquist ({sample_rate_hz / 2:g} Hz "
                                   f"at the description's {sample_rate_hz:g} Hz); remove the rows above it")
        if rows and f <= rows[-1][0]:
            raise MeasurementError(f"{where}: frequency_hz {f:g} is not above the previous row's {rows[-1][0]:g}; "
                                   "frequencies must strictly increase: sort the rows and remove duplicates")
        if abs(values[1]) > MAX_ABS_DB:
            raise MeasurementError(f"{where}: magnitude_db {values[1]:g} is beyond +-{MAX_ABS_DB:g} dB; give the "
                                   "magnitude in dB (not linear or in another unit)")
        rows.append(tuple(values))
        if len(rows) > MAX_POINTS:
            raise MeasurementError(f"{where}: more than {MAX_POINTS} rows; thin the measurement out")
    if header is None:
        raise MeasurementError(f"{shown}: no header row and no data; the file needs a header "
                               f"frequency_hz,magnitude_db and at least {MIN_POINTS} rows")
    if len(rows) < MIN_POINTS:
        raise MeasurementError(f"{shown}: {len(rows)} data rows; a measurement needs at least {MIN_POINTS} "
                               "frequencies: add more points")
    a = np.array(rows, dtype=float)
    phase = a[:, 2].copy() if a.shape[1] == 3 else None
    return Measurement(shown, a[:, 0].copy(), a[:, 1].copy(), phase)


def parse_wav(raw: bytes, shown: str, sample_rate_hz: float) -> Measurement:
    """A WAV impulse response (mono, at *sample_rate_hz*) as a measured response at the FFT bins."""
    import io

    from scipy.io import wavfile

    if len(raw) < 12 or raw[:4] not in (b"RIFF", b"RIFX") or raw[8:12] != b"WAVE":
        raise MeasurementError(f"{shown}: not a WAV file (no RIFF/WAVE header); give a mono .wav impulse response")
    try:
        import warnings

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # scipy warns about unknown chunks; the data are what matter
            rate, data = wavfile.read(io.BytesIO(raw))
    except Exception as e:  # scipy raises ValueError and others for damaged files
        raise MeasurementError(f"{shown}: cannot read the WAV file ({e}); export it again as PCM or float WAV") \
            from None
    if data.ndim != 1:
        raise MeasurementError(f"{shown}: {data.shape[1]} channels; an impulse response must be mono: export "
                               "each way's response to its own file")
    if float(rate) != float(sample_rate_hz):
        raise MeasurementError(f"{shown}: recorded at {rate} Hz but the description runs at {sample_rate_hz:g} Hz; "
                               f"resample the impulse response to {sample_rate_hz:g} Hz (or measure at that rate)")
    if data.size < 2 * MIN_POINTS:
        raise MeasurementError(f"{shown}: {data.size} samples; an impulse response needs at least "
                               f"{2 * MIN_POINTS} samples (it gives {MIN_POINTS} frequencies)")
    if data.size > MAX_POINTS:
        raise MeasurementError(f"{shown}: {data.size} samples; at most {MAX_POINTS} are accepted: trim the "
                               "impulse response's silent tail")
    if data.dtype.kind in "iu":
        bits = data.dtype.itemsize * 8
        x = data.astype(float) / 2.0 ** (bits - 1)
        if data.dtype.kind == "u":
            x = x - 1.0
    else:
        x = data.astype(float)
    if not np.all(np.isfinite(x)):
        raise MeasurementError(f"{shown}: the impulse response has a NaN or infinite sample; export it again")
    if not np.any(x):
        raise MeasurementError(f"{shown}: the impulse response is all zeros; check the recording")
    h = np.fft.rfft(x)
    f = np.fft.rfftfreq(x.size, 1.0 / sample_rate_hz)
    mag = np.abs(h)
    floor = np.max(mag) * 1e-12
    mag_db = 20 * np.log10(np.maximum(mag, floor))
    return Measurement(shown, f[1:].copy(), mag_db[1:].copy(), np.degrees(np.angle(h[1:])))


def log_axis(lo_hz: float, hi_hz: float, per_octave: int) -> np.ndarray:
    """Logarithmically spaced frequencies from *lo_hz* to *hi_hz* inclusive, at least *per_octave* per octave."""
    n = max(2, int(math.ceil(math.log2(hi_hz / lo_hz) * per_octave)) + 1)
    return np.geomspace(lo_hz, hi_hz, n)


def smooth_fractional_octave(freqs_hz, magnitude_db, width_oct: float,
                             per_octave: int = SMOOTHING_POINTS_PER_OCTAVE) -> tuple[np.ndarray, np.ndarray]:
    """Fractional-octave power smoothing of a magnitude response.

    The response is interpolated (linearly in dB over log frequency) to a
    logarithmic axis of *per_octave* points per octave over the measured span;
    at each point the power ``10^(dB/10)`` is averaged over a rectangular window
    *width_oct* octaves wide centred on it (the window is cut short at the ends
    of the span, where it averages what there is).

    Parameters
    ----------
    freqs_hz, magnitude_db : array_like
        The response, frequencies increasing.
    width_oct : float
        Window width in octaves (1/6 for "1/6-octave smoothing"); 0 returns the
        response on the logarithmic axis unsmoothed.

    Returns
    -------
    (freqs_hz, magnitude_db) on the logarithmic axis.

    References
    ----------
    P. D. Hatziantoniou & J. N. Mourjopoulos, "Generalized fractional-octave
    smoothing of audio and acoustic responses", J. Audio Eng. Soc. 48(4),
    259-280, 2000.  J. G. Tylka, B. B. Boren & E. Y. Choueiri, J. Audio Eng. Soc.
    65(3), 239-245, 2017 (interpolation to a log axis, fixed-width window).

    Examples
    --------
    >>> f = np.geomspace(20, 20000, 200)
    >>> g, m = smooth_fractional_octave(f, np.full(200, -6.0), 1/3)
    >>> bool(np.allclose(m, -6.0))
    True
    """
    f = np.asarray(freqs_hz, dtype=float)
    db = np.asarray(magnitude_db, dtype=float)
    axis = log_axis(float(f[0]), float(f[-1]), per_octave)
    on_axis = np.interp(np.log(axis), np.log(f), db)
    if width_oct <= 0:
        return axis, on_axis
    step = math.log2(axis[1] / axis[0])
    half = int(round(width_oct / 2 / step))
    if half < 1:
        return axis, on_axis
    p = 10.0 ** (on_axis / 10.0)
    c = np.concatenate([[0.0], np.cumsum(p)])
    i = np.arange(axis.size)
    lo = np.maximum(i - half, 0)
    hi = np.minimum(i + half, axis.size - 1) + 1
    mean = (c[hi] - c[lo]) / (hi - lo)
    return axis, 10.0 * np.log10(mean)
