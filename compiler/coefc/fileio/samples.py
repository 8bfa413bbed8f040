"""Reading and writing sample files: WAV or text in, data words out (and back).

Formats
-------
``.wav``  PCM WAV read and written with :mod:`scipy.io.wavfile`: 16-, 24- and 32-bit
          integer, or 32/64-bit float.  Input must be mono (one signal feeds every
          channel); output has one WAV channel per filter channel.
``.txt``  One sample per line: a raw integer data word (fixed point) or a number
          (float32 arithmetic).  Blank lines and ``#`` comments are allowed.  Output
          starts with a header line ``# channels: a b c`` and has one column per
          channel, separated by single spaces.

Scaling (fixed-point arithmetic with a ``W``-bit data word)
-----------------------------------------------------------
- integer PCM of ``P`` bits: full scale maps to full scale by shifting, ``word =
  pcm * 2^(W-P)`` when ``W >= P``, otherwise ``pcm / 2^(P-W)`` rounded by the
  arithmetic's rounding mode and saturated.  24-bit WAV arrives left-justified in
  32-bit integers and is handled as 32-bit PCM (the low byte is zero).
- float WAV ``[-1, 1)``: ``word = x * 2^(W-1)`` rounded by the arithmetic's rounding
  mode and saturated to the word.
- output WAV uses the data word's container: ``W <= 16`` -> int16, ``W <= 32`` ->
  int32, both left-justified (``word * 2^(16-W)`` or ``word * 2^(32-W)``); float32
  arithmetic -> float32 WAV.  Wider words can only be written as text.

For float32 arithmetic integer PCM becomes ``pcm / 2^(P-1)`` and float WAV is read
as float32.  Every problem is a :class:`coefc.errors.DataError` naming the file and,
for text, the line.
"""

from __future__ import annotations

import array
import io
import re
import struct
from pathlib import Path

import numpy as np

from ..errors import DataError
from ..program import Arithmetic
from ..qformat import fit_word, round_real, round_shift

SUFFIXES = (".wav", ".txt")


def _kind(path: Path, what: str) -> str:
    suf = path.suffix.lower()
    if suf not in SUFFIXES:
        raise DataError(f"{path}: unsupported {what} format '{suf or '(no suffix)'}'; use a .wav file or a .txt "
                        "file with one sample per line")
    return suf[1:]


def output_kind(path) -> str:
    """``"wav"`` or ``"txt"`` for an output path; DataError for any other suffix."""
    return _kind(Path(path), "output")


def _wav_bits(path: Path, raw: bytes) -> int:
    """Bits per sample from the 'fmt ' chunk (scipy does not report 24 vs 32).

    Also refuses a file whose chunks run past its end (a truncated download or
    copy), which scipy would otherwise read as a shorter signal without a word.
    """
    if len(raw) < 12 or raw[:4] not in (b"RIFF", b"RIFX") or raw[8:12] != b"WAVE":
        raise DataError(f"{path}: not a WAV file (no RIFF/WAVE header); give a PCM .wav or a .txt file")
    end = "<" if raw[:4] == b"RIFF" else ">"
    if struct.unpack(end + "I", raw[4:8])[0] < 4:
        raise DataError(f"{path}: WAV header gives a RIFF size of {struct.unpack(end + 'I', raw[4:8])[0]} bytes; "
                        "the file is damaged: export it again")
    pos = 12
    bits = None
    has_data = False
    while pos + 8 <= len(raw):
        cid, size = raw[pos:pos + 4], struct.unpack(end + "I", raw[pos + 4:pos + 8])[0]
        body = raw[pos + 8:pos + 8 + size]
        if cid == b"fmt ":
            if size < 16 or len(body) < 16:
                raise DataError(f"{path}: WAV 'fmt ' chunk is cut short ({len(body)} of at least 16 bytes); "
                                "the file is damaged or truncated: export it again")
            bits = struct.unpack(end + "H", body[14:16])[0]
            channels = struct.unpack(end + "H", body[2:4])[0]
            if channels == 0:
                raise DataError(f"{path}: WAV 'fmt ' chunk says 0 channels; the file is damaged: export it again "
                                "as mono PCM WAV")
        elif cid == b"data":
            has_data = True
            if len(body) < size:
                raise DataError(f"{path}: WAV data is truncated ({len(body)} of the {size} bytes its header "
                                "announces); the file is damaged or incomplete: export it again")
        pos += 8 + size + (size & 1)
    if bits is None:
        raise DataError(f"{path}: WAV file has no 'fmt ' chunk; the file is damaged: re-export it as PCM WAV")
    if not has_data:
        raise DataError(f"{path}: WAV file has no 'data' chunk (no samples); the file is damaged or truncated: "
                        "export it again")
    return bits


def read_samples(path, arithmetic: Arithmetic, sample_rate_hz: float | None = None) -> np.ndarray:
    """Read a mono input file as data words (int64) or float32 samples.

    Parameters
    ----------
    path : path-like
        ``.wav`` or ``.txt`` (see the module docstring).
    arithmetic : Arithmetic
        Gives the data word (or float32) the samples are converted to.
    sample_rate_hz : float, optional
        When given, a WAV file of another rate is an error.
    """
    path = Path(path)
    kind = _kind(path, "input")
    if not path.is_file():
        raise DataError(f"{path}: input file not found")
    if kind == "txt":
        return _read_text(path, arithmetic)
    try:
        raw = path.read_bytes()
    except OSError as e:
        raise DataError(f"{path}: cannot read ({e.strerror or e})") from None
    bits = _wav_bits(path, raw)
    from scipy.io import wavfile

    try:
        import warnings

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", wavfile.WavFileWarning)
            rate, data = wavfile.read(io.BytesIO(raw))
    except Exception as e:  # scipy's parser on a damaged file: any failure is bad input
        raise DataError(f"{path}: unreadable WAV ({e}); give 16/24/32-bit integer or float PCM WAV") from None
    if data.ndim == 2 and data.shape[1] == 1:
        data = data[:, 0]
    if data.ndim != 1:
        raise DataError(f"{path}: WAV has {data.shape[1]} channels; the input must be mono (one signal feeds "
                        "every channel): split or mix it down first")
    if sample_rate_hz is not None and abs(rate - sample_rate_hz) > 1e-9 * sample_rate_hz:
        raise DataError(f"{path}: WAV sample rate is {rate} Hz but the description is designed for "
                        f"{sample_rate_hz:g} Hz; resample the input or design for {rate} Hz")
    if data.shape[0] == 0:
        raise DataError(f"{path}: WAV file holds no samples; give an input with at least one sample")
    if data.dtype.kind == "f":
        if not np.all(np.isfinite(data)):
            raise DataError(f"{path}: float WAV contains NaN or infinity")
        if arithmetic.is_float and np.max(np.abs(data)) > FLOAT32_MAX:
            raise DataError(f"{path}: float WAV holds samples outside the float32 range; scale them down")
        return _from_float(data.astype(np.float64), arithmetic)
    if data.dtype in (np.int16, np.int32):
        pcm_bits = 16 if data.dtype == np.int16 else 32  # 24-bit arrives left-justified in int32
        return _from_pcm(data.astype(np.int64), pcm_bits, arithmetic)
    raise DataError(f"{path}: {bits}-bit {data.dtype} WAV is not supported; use 16, 24 or 32-bit integer "
                    "or float PCM")


def _from_pcm(pcm: np.ndarray, bits: int, ar: Arithmetic) -> np.ndarray:
    if ar.is_float:
        return (pcm / float(1 << (bits - 1))).astype(np.float32)
    w = ar.data.width
    if w >= bits:
        return pcm << (w - bits)
    return fit_word(round_shift(pcm, bits - w, ar.rounding), w, "saturate")


def _from_float(x: np.ndarray, ar: Arithmetic) -> np.ndarray:
    if ar.is_float:
        return x.astype(np.float32)
    w = ar.data.width
    r = round_real(np.ldexp(x, w - 1), ar.rounding)
    if w <= 53:
        return np.clip(r, ar.data.min_int, ar.data.max_int).astype(np.int64)
    return np.array([fit_word(int(v), w, "saturate") for v in r], dtype=np.int64)


_INT_RE = re.compile(r"[+-]?[0-9]+")
_PLAIN_LINE_RE = re.compile(rb"[\x20-\x7e\t]*\r?\n?")
_REAL_RE = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")
FLOAT32_MAX = float(np.finfo(np.float32).max)


def _read_text(path: Path, ar: Arithmetic) -> np.ndarray:
    """Plain ASCII samples, one per line, read line by line into a packed array (a long
    file never becomes a list of Python objects)."""
    vals = array.array("d" if ar.is_float else "q")
    try:
        with open(path, "rb") as f:
            for lineno, raw in enumerate(f, 1):
                if lineno == 1 and raw.startswith(b"\xef\xbb\xbf"):
                    raise DataError(f"{path}:1: the file starts with a byte-order mark; save it as plain "
                                    "ASCII text (one integer sample per line, no BOM)")
                if not _PLAIN_LINE_RE.fullmatch(raw):
                    raise DataError(f"{path}:{lineno}: not plain ASCII text (a binary file or other "
                                    "characters); write one integer sample per line with the digits 0-9")
                line = raw.decode("ascii")
                body = line.split("#", 1)[0].strip()
                if body:
                    vals.append(_text_sample(path, lineno, body, ar))
    except OSError as e:
        raise DataError(f"{path}: cannot read ({e.strerror or e})") from None
    if not vals:
        raise DataError(f"{path}: no samples (only blank lines or comments); write one sample per line")
    return np.frombuffer(vals, dtype=np.float64).astype(np.float32) if ar.is_float \
        else np.frombuffer(vals, dtype=np.int64).copy()


def _text_sample(path: Path, lineno: int, body: str, ar: Arithmetic):
    parts = body.split()
    if len(parts) != 1:
        raise DataError(f"{path}:{lineno}: {len(parts)} values on one line; the input takes one sample per line")
    tok = parts[0]
    if ar.is_float:
        if not _REAL_RE.fullmatch(tok):
            raise DataError(f"{path}:{lineno}: '{tok}' is not a finite decimal number (such as -0.25 or 1e-3)")
        v = float(tok)
        if not abs(v) <= FLOAT32_MAX:
            raise DataError(f"{path}:{lineno}: {tok} is outside the float32 range (magnitude at most "
                            f"{FLOAT32_MAX:.7g})")
        return v
    if not _INT_RE.fullmatch(tok) or ar.data.width > 64:
        raise DataError(f"{path}:{lineno}: '{tok}' is not an integer data word; write raw {ar.data} words "
                        f"({ar.data.min_int} .. {ar.data.max_int}), one per line")
    v = int(tok, 10)
    if not ar.data.min_int <= v <= ar.data.max_int:
        raise DataError(f"{path}:{lineno}: {v} is outside the {ar.data} data word "
                        f"({ar.data.min_int} .. {ar.data.max_int})")
    return v


def format_samples(path, outputs: dict[str, np.ndarray], arithmetic: Arithmetic, sample_rate_hz: float) -> bytes:
    """The bytes of the output file for *outputs* (channel name -> samples, same length)."""
    path = Path(path)
    kind = _kind(path, "output")
    names = list(outputs)
    if not names:
        raise DataError(f"{path}: no channel to write")
    cols = [np.asarray(outputs[n]) for n in names]
    if kind == "txt":
        lines = ["# channels: " + " ".join(names)]
        if arithmetic.is_float:
            fmt = lambda v: np.format_float_positional(np.float32(v), unique=True, trim="-")  # noqa: E731
            strs = [[fmt(v) for v in c] for c in cols]
        else:
            strs = [[str(int(v)) for v in c] for c in cols]
        lines += [" ".join(row) for row in zip(*strs)]
        return ("\n".join(lines) + "\n").encode("ascii")
    if arithmetic.is_float:
        data = np.stack(cols, axis=1).astype(np.float32)
    else:
        w = arithmetic.data.width
        if w > 32:
            raise DataError(f"{path}: {arithmetic.data} data words are wider than 32 bits and cannot be written "
                            "to WAV; write a .txt file instead")
        cont, dt = (16, np.int16) if w <= 16 else (32, np.int32)
        data = (np.stack(cols, axis=1).astype(np.int64) << (cont - w)).astype(dt)
    if data.shape[1] == 1:
        data = data[:, 0]
    rate = int(round(sample_rate_hz))
    if rate != sample_rate_hz or not 1 <= rate <= 0xFFFFFFFF:
        raise DataError(f"{path}: a WAV header holds a whole number of Hz, and the description's sample rate "
                        f"is {sample_rate_hz:g} Hz; write a .txt file instead")
    from scipy.io import wavfile

    buf = io.BytesIO()
    wavfile.write(buf, rate, data)
    return buf.getvalue()


def write_samples(path, outputs: dict[str, np.ndarray], arithmetic: Arithmetic, sample_rate_hz: float) -> None:
    """Write *outputs* to *path* atomically (no half-written file on any error)."""
    from .output import write_atomic

    payload = format_samples(path, outputs, arithmetic, sample_rate_hz)
    try:
        write_atomic(Path(path), payload)
    except OSError as e:
        raise DataError(f"{path}: cannot write ({e.strerror or e})") from None
