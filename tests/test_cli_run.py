"""``coefc run`` and sample I/O: WAV and text formats, scaling, errors, exit codes.

The outputs are checked against scipy.signal.sosfilt of the float design (scipy as
the reference library) and the WAV containers against the RIFF/WAVE layout read
back by Python's own ``wave`` module.
"""

from __future__ import annotations

import sys
import wave

import numpy as np
import pytest
from scipy import signal
from scipy.io import wavfile

from coefc.fileio import samples as sampleio
from coefc.errors import DataError
from coefc.program import Arithmetic
from coefc.qformat import QFormat

FS = 48000
Q15 = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32)
Q31 = Arithmetic()
Q23 = Arithmetic(data=QFormat(1, 23), coef=QFormat(2, 22), acc_bits=56)
F32 = Arithmetic(kind="float32", data=None, coef=None)

DESC = """\
name = "bench_probe"
sample_rate_hz = 48000

[implementation]
target = "mcu32"
scaling = "linf"

[[channel]]
name = "low"
stages = [ { kind = "lowpass", response = "butterworth", order = 4, cutoff_hz = 1000 } ]

[[channel]]
name = "high"
stages = [ { kind = "highpass", response = "butterworth", order = 2, cutoff_hz = 5000 },
           { kind = "gain", db = -6.0 } ]
"""


@pytest.fixture()
def desc(tmp_path):
    p = tmp_path / "probe.toml"
    p.write_text(DESC)
    return p


def cli(args, capsys, monkeypatch):
    from coefc.cli import main

    monkeypatch.setattr(sys, "argv", ["coefc", *map(str, args)])
    try:
        main()
        code = 0
    except SystemExit as e:
        code = e.code if isinstance(e.code, int) else (0 if e.code is None else 2)
    out, err = capsys.readouterr()
    return code, out, err


def _sine(n=9600, f=440.0, amp=0.5):
    return amp * np.sin(2 * np.pi * f / FS * np.arange(n))


def test_run_wav16_to_multichannel_wav_tracks_scipy(desc, tmp_path, capsys, monkeypatch):
    x16 = np.round(_sine() * 32767).astype(np.int16)
    wavfile.write(tmp_path / "in.wav", FS, x16)
    code, out, err = cli(["run", desc, tmp_path / "in.wav", tmp_path / "out.wav"], capsys, monkeypatch)
    assert code == 0, err
    assert "2 channel(s) (low, high)" in out
    rate, y = wavfile.read(tmp_path / "out.wav")
    assert rate == FS and y.dtype == np.int32 and y.shape == (len(x16), 2)  # Q1.31 words -> int32
    xf = x16 / 32768.0
    ref_low = signal.sosfilt(signal.butter(4, 1000, fs=FS, output="sos"), xf)
    ref_high = signal.sosfilt(signal.butter(2, 5000, "highpass", fs=FS, output="sos"), xf) * 10 ** (-6 / 20)
    assert np.max(np.abs(y[:, 0] / 2 ** 31 - ref_low)) < 1e-6
    assert np.max(np.abs(y[:, 1] / 2 ** 31 - ref_high)) < 1e-6


def test_run_text_in_text_out_with_header_and_columns(desc, tmp_path, capsys, monkeypatch):
    (tmp_path / "in.txt").write_text("# an impulse\n\n1073741824\n0  # silence\n0\n0\n")
    code, out, err = cli(["run", desc, tmp_path / "in.txt", tmp_path / "out.txt", "--channel", "low"],
                         capsys, monkeypatch)
    assert code == 0, err
    lines = (tmp_path / "out.txt").read_text().splitlines()
    assert lines[0] == "# channels: low"
    h = [int(v) / 2 ** 31 for v in lines[1:]]
    ref = signal.sosfilt(signal.butter(4, 1000, fs=FS, output="sos"), [0.5, 0, 0, 0])
    assert np.allclose(h, ref, atol=1e-8)
    code, _, _ = cli(["run", desc, tmp_path / "in.txt", tmp_path / "two.txt"], capsys, monkeypatch)
    rows = (tmp_path / "two.txt").read_text().splitlines()
    assert rows[0] == "# channels: low high" and all(len(r.split(" ")) == 2 for r in rows[1:])


@pytest.mark.parametrize("content, message", [
    ("1\n2\n99999999999\n", "in.txt:3: 99999999999 is outside the Q1.31 data word"),
    ("1\n0.5\n", "in.txt:2: '0.5' is not an integer data word"),
    ("1 2\n", "in.txt:1: 2 values on one line"),
])
def test_text_input_errors_name_the_line(desc, tmp_path, capsys, monkeypatch, content, message):
    (tmp_path / "in.txt").write_text(content)
    (tmp_path / "out.txt").write_text("old\n")
    code, out, err = cli(["run", desc, tmp_path / "in.txt", tmp_path / "out.txt"], capsys, monkeypatch)
    assert code == 2
    assert message in err and err.count("\n") == 1 and "Traceback" not in err
    assert (tmp_path / "out.txt").read_text() == "old\n"  # never a half-written file


def test_wav_input_errors(desc, tmp_path, capsys, monkeypatch):
    wavfile.write(tmp_path / "st.wav", FS, np.zeros((10, 2), dtype=np.int16))
    wavfile.write(tmp_path / "r44.wav", 44100, np.zeros(10, dtype=np.int16))
    wavfile.write(tmp_path / "u8.wav", FS, np.zeros(10, dtype=np.uint8))
    (tmp_path / "junk.wav").write_bytes(b"not a wav file at all")
    cases = {"st.wav": "2 channels; the input must be mono", "r44.wav": "44100 Hz but the description",
             "u8.wav": "8-bit uint8 WAV is not supported", "junk.wav": "not a WAV file",
             "missing.wav": "input file not found", "in.flac": "unsupported input format '.flac'"}
    (tmp_path / "in.flac").write_bytes(b"x")
    for name, msg in cases.items():
        code, _, err = cli(["run", desc, tmp_path / name, tmp_path / "o.wav"], capsys, monkeypatch)
        assert code == 2 and msg in err, (name, err)
        assert not (tmp_path / "o.wav").exists()


def _write_wav24(path, values):
    with wave.open(str(path), "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(3)
        w.setframerate(FS)
        w.writeframes(b"".join(int(v).to_bytes(3, "little", signed=True) for v in values))


def test_24_bit_wav_maps_full_scale_to_full_scale(tmp_path):
    vals = [-(1 << 23), -1, 0, 1, (1 << 23) - 1]
    _write_wav24(tmp_path / "a.wav", vals)
    assert sampleio.read_samples(tmp_path / "a.wav", Q23, FS).tolist() == vals  # Q1.23: as is
    assert sampleio.read_samples(tmp_path / "a.wav", Q31, FS).tolist() == [v << 8 for v in vals]
    # down to 16 bits: v / 2^8 rounded to nearest (ties up) and saturated
    assert sampleio.read_samples(tmp_path / "a.wav", Q15, FS).tolist() == [-32768, 0, 0, 0, 32767]


def test_float_and_32_bit_wav_are_rounded_and_saturated(tmp_path):
    wavfile.write(tmp_path / "f.wav", FS, np.array([0.5, -1.0, 1.0, 3.0, 0.25 / 32768, 0.75 / 32768], dtype=np.float32))
    assert sampleio.read_samples(tmp_path / "f.wav", Q15, FS).tolist() == [16384, -32768, 32767, 32767, 0, 1]
    assert sampleio.read_samples(tmp_path / "f.wav", Q15.with_(rounding="truncate"), FS).tolist()[4:] == [0, 0]
    wavfile.write(tmp_path / "i32.wav", FS, np.array([2 ** 31 - 1, -2 ** 31, 3 << 15], dtype=np.int32))
    assert sampleio.read_samples(tmp_path / "i32.wav", Q15, FS).tolist() == [32767, -32768, 2]  # 1.5 -> 2
    assert sampleio.read_samples(tmp_path / "f.wav", F32, FS).dtype == np.float32


def test_output_containers(tmp_path):
    y = {"a": np.array([-(1 << 23), 5, (1 << 23) - 1])}
    sampleio.write_samples(tmp_path / "o.wav", y, Q23, FS)
    with wave.open(str(tmp_path / "o.wav")) as w:  # Python's wave module reads the RIFF header
        assert (w.getsampwidth(), w.getnchannels(), w.getframerate()) == (4, 1, FS)
    assert wavfile.read(tmp_path / "o.wav")[1].tolist() == [v << 8 for v in y["a"]]  # left-justified
    sampleio.write_samples(tmp_path / "s.wav", {"a": np.array([1, -2]), "b": np.array([3, 4])}, Q15, FS)
    r, d = wavfile.read(tmp_path / "s.wav")
    assert d.dtype == np.int16 and d.tolist() == [[1, 3], [-2, 4]]
    sampleio.write_samples(tmp_path / "f.wav", {"a": np.array([0.25, -0.5], dtype=np.float32)}, F32, FS)
    assert wavfile.read(tmp_path / "f.wav")[1].dtype == np.float32
    with pytest.raises(DataError, match="wider than 32 bits"):
        sampleio.write_samples(tmp_path / "w.wav", {"a": np.array([1])}, Q31.with_(data=QFormat(1, 39)), FS)


def test_float32_text_round_trip(tmp_path):
    y = np.array([0.1, -1e-8, 3.0], dtype=np.float32)
    sampleio.write_samples(tmp_path / "o.txt", {"a": y}, F32, FS)
    back = sampleio.read_samples(tmp_path / "o.txt", F32)
    assert np.array_equal(back, y)


def test_run_float32_target(desc, tmp_path, capsys, monkeypatch):
    wavfile.write(tmp_path / "in.wav", FS, _sine().astype(np.float32))
    code, out, err = cli(["run", desc, tmp_path / "in.wav", tmp_path / "out.wav", "--target", "float32"],
                         capsys, monkeypatch)
    assert code == 0, err
    _, y = wavfile.read(tmp_path / "out.wav")
    ref = signal.sosfilt(signal.butter(4, 1000, fs=FS, output="sos"), _sine().astype(np.float32).astype(float))
    assert y.dtype == np.float32 and np.max(np.abs(y[:, 0] - ref)) < 1e-5


def test_run_reports_overflow_with_a_caution(desc, tmp_path, capsys, monkeypatch):
    # a full-scale step into a 4th-order Butterworth low-pass overshoots by about 11 %
    # (from memory: Butterworth step-response tables), so without scaling the output saturates
    (tmp_path / "in.txt").write_text("2147483647\n" * 400)
    code, out, err = cli(["run", desc, tmp_path / "in.txt", tmp_path / "out.txt", "--channel", "low",
                          "--scaling", "none"], capsys, monkeypatch)
    assert code == 0
    assert "overflow in low" in err and "sign-off" in err
