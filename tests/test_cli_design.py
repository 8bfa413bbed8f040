"""`coefc design` through the real CLI entry point: examples pass, bad descriptions fail cleanly."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import FILTERS, REPO, example_files

BAD = REPO / "tests" / "bad"


def bad_files() -> list[Path]:
    return sorted(BAD.glob("*.toml"))


def expected_fragment(path: Path) -> str:
    first = path.read_bytes().split(b"\n", 1)[0].decode("ascii")
    assert first.startswith("# expect: "), f"{path.name} lacks its '# expect: ...' first line"
    return first[len("# expect: "):]


def run_cli(args, capsys, monkeypatch):
    """Run coefc.cli.main in-process; return (exit code, stdout, stderr)."""
    from coefc.cli import main

    monkeypatch.setattr(sys, "argv", ["coefc", *map(str, args)])
    with pytest.raises(SystemExit) as exc:
        main()
    out = capsys.readouterr()
    code = exc.value.code
    return (0 if code is None else code), out.out, out.err


def test_bad_corpus_is_large_enough():
    assert len(bad_files()) >= 30


@pytest.mark.parametrize("path", bad_files(), ids=lambda p: p.stem)
def test_bad_description_fails_cleanly(path, capsys, monkeypatch):
    code, out, err = run_cli(["design", path], capsys, monkeypatch)
    assert code == 2
    assert out == ""
    assert "Traceback" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("coefc: error: ")
    assert str(path) in lines[0]  # the message names the file
    assert expected_fragment(path) in lines[0]


def test_bad_file_through_installed_entry_point():
    # One run as a real process, so nothing in-process hides a traceback.
    path = BAD / "cutoff_above_nyquist.toml"
    r = subprocess.run([sys.executable, "-c", "from coefc.cli import main; main()", "design", str(path)],
                       capture_output=True, text=True, timeout=60)
    assert r.returncode == 2
    assert "Traceback" not in r.stderr
    assert r.stderr.count("\n") == 1
    assert "sample_rate_hz=48000 -> 24000 Hz" in r.stderr
    assert "channel 'main', stage 2, key 'cutoff_hz'" in r.stderr


@pytest.mark.parametrize("args,fragment", [
    (["nothere.toml"], "nothere.toml: file not found"),
    ([str(BAD)], "is a directory"),
    ([str(FILTERS / "three_way_monitor.toml"), "--freqs", "100,abc"], "'abc' is not a frequency"),
    ([str(FILTERS / "three_way_monitor.toml"), "--freqs", "30000"], "(sample_rate_hz=48000 -> 24000 Hz)"),
    ([str(FILTERS / "three_way_monitor.toml"), "--channel", "wofer"], "did you mean 'woofer'"),
])
def test_bad_command_line(args, fragment, capsys, monkeypatch):
    code, out, err = run_cli(["design", *args], capsys, monkeypatch)
    assert code == 2
    assert len(err.strip().splitlines()) == 1
    assert fragment in err


def test_examples_exist():
    names = {p.name for p in example_files()}
    assert {"three_way_monitor.toml", "sound_level_meter.toml", "decimator_88k2.toml",
            "decimator_192k.toml"} <= names


@pytest.mark.parametrize("path", example_files(), ids=lambda p: p.stem)
def test_example_designs_and_json_contract(path, capsys, monkeypatch):
    code, out, err = run_cli(["design", path], capsys, monkeypatch)
    assert code == 0, err
    assert "channel " in out
    code, out, err = run_cli(["design", path, "--json", "-"], capsys, monkeypatch)
    assert code == 0, err
    doc = json.loads(out)
    assert doc["channels"]
    for ch in doc["channels"]:
        assert {"name", "sample_rate_hz", "response", "stages", "latency_samples", "warnings"} <= set(ch)
        assert ch["response"]
        for row in ch["response"]:
            assert set(row) >= {"freq_hz", "magnitude_db", "phase_deg", "group_delay_samples"}
            assert row["freq_hz"] < ch["sample_rate_hz"] / 2


def test_freqs_and_channel_options(capsys, monkeypatch, tmp_path):
    dest = tmp_path / "d.json"
    code, out, err = run_cli(["design", FILTERS / "three_way_monitor.toml", "--freqs", "350,2800",
                              "--channel", "woofer", "--json", dest], capsys, monkeypatch)
    assert code == 0, err
    doc = json.loads(dest.read_text())
    assert [c["name"] for c in doc["channels"]] == ["woofer"]
    assert [r["freq_hz"] for r in doc["channels"][0]["response"]] == [350.0, 2800.0]
    # The woofer's LR4 low-pass branch is -6.02 dB at its 350 Hz crossover
    # (Linkwitz 1976); the other stages of the channel add the rest, so only
    # check the sign and that the text report was printed too.
    assert doc["channels"][0]["response"][0]["magnitude_db"] < -6.0
    assert "woofer" in out


def test_decimator_tap_counts_in_report(capsys, monkeypatch):
    # Kaiser's formula (Kaiser 1974, as in scipy.signal.kaiserord) for A = 100 dB plus the
    # default 0.5 dB quantisation margin, passband edge 20 kHz: ceil((100.5 - 7.95) / 2.285 /
    # (pi * 2050 / 44100) + 1) = 279 taps at 88.2 kHz and 46 at 192 kHz (derived from that
    # formula); both measure at least 100.5 dB, so the formula's lengths stand.
    code, out, _ = run_cli(["design", FILTERS / "decimator_88k2.toml", "--json", "-"], capsys, monkeypatch)
    ch = json.loads(out)["channels"][0]
    assert ch["fir_taps"] == 279
    req = ch["stages"][0]["requirement"]
    assert req["attenuation_db"] == 100 and req["margin_db"] == 0.5 and req["reached_attenuation_db"] >= 100.5
    code, out, _ = run_cli(["design", FILTERS / "decimator_192k.toml", "--json", "-"], capsys, monkeypatch)
    assert json.loads(out)["channels"][0]["fir_taps"] == 46
