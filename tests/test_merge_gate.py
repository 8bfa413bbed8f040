"""A merge gate runs coefc as root on files anyone can change: outputs never replace
special files, interrupts clean up, and exit 1 only ever means "over budget"
(bad input 2, a bug of coefc 3).  Facts of the trade: POSIX file types and the
128 + signal-number exit status of a process ended by a signal (common practice,
no source)."""

from __future__ import annotations

import json
import shutil
import os
import signal
import stat
import subprocess
import sys
import threading
import time

import pytest

from pathlib import Path

from conftest import FILTERS

MAIN = "from coefc.cli import main; main()"
EXAMPLE = FILTERS / "three_way_monitor.toml"


def coefc(*args, **kw):
    return subprocess.run([sys.executable, "-c", MAIN, *map(str, args)], capture_output=True, text=True,
                          timeout=300, **kw)


def test_json_through_a_symlink_lands_in_its_target_and_keeps_the_link(tmp_path):
    real = tmp_path / "real.json"
    real.write_text("old")
    link = tmp_path / "link.json"
    link.symlink_to(real)
    r = coefc("check", EXAMPLE, "--channel", "woofer", "--json", link)
    assert r.returncode == 0, r.stderr
    assert link.is_symlink() and os.readlink(link) == str(real)
    assert json.loads(real.read_text())["ok"] is True
    assert sorted(p.name for p in tmp_path.iterdir()) == ["link.json", "real.json"]  # no temporary left


def test_json_to_a_fifo_is_streamed_not_replaced(tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    got = []
    def read():
        with open(fifo, "rb") as f:
            got.append(f.read())

    reader = threading.Thread(target=read)
    reader.start()
    r = coefc("check", EXAMPLE, "--channel", "woofer", "--json", fifo)
    reader.join(60)
    assert r.returncode == 0, r.stderr
    assert stat.S_ISFIFO(os.stat(fifo).st_mode)
    assert json.loads(got[0])["ok"] is True


def test_a_character_device_is_written_to_and_kept(tmp_path):
    node = tmp_path / "null.h"
    try:  # our own copy of /dev/null's node (char 1,3), so the real one is never at risk
        os.mknod(node, stat.S_IFCHR | 0o666, os.makedev(1, 3))
    except (PermissionError, OSError) as e:
        pytest.skip(f"cannot create a device node here ({e})")
    for args in (("check", EXAMPLE, "--channel", "woofer", "--json", node, "--junit", node),
                 ("build", EXAMPLE, "-o", node)):
        r = coefc(*args)
        assert r.returncode == 0, r.stderr
        assert stat.S_ISCHR(os.stat(node).st_mode), args
    assert sorted(p.name for p in tmp_path.iterdir()) == ["null.h"]


def test_sigterm_unwinds_and_leaves_no_temporary_file(tmp_path):
    out = tmp_path / "sweep.csv"
    p = subprocess.Popen([sys.executable, "-c", MAIN, "sweep", str(EXAMPLE), "--data", "12:32:1",
                          "--coef", "12:32:1", "--csv", str(out)], stdout=subprocess.PIPE,
                         stderr=subprocess.PIPE, text=True)
    time.sleep(4)
    p.send_signal(signal.SIGTERM)
    _, err = p.communicate(timeout=60)
    assert p.returncode == 143, err
    assert "terminated" in err and "Traceback" not in err
    assert list(tmp_path.iterdir()) == []


def test_deeply_nested_toml_is_bad_input(tmp_path):
    f = tmp_path / "deep.toml"
    f.write_text('name = "x"\nsample_rate_hz = 48000\nz = ' + "[" * 5000 + "]" * 5000 + "\n")
    r = coefc("check", f)
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "nested too deeply" in r.stderr


def test_an_internal_error_is_exit_3_with_one_line(monkeypatch, capsys):
    import coefc.api
    from coefc.cli import main

    def broken(self, *a, **k):
        raise ZeroDivisionError("simulated defect")

    monkeypatch.setattr(coefc.api.Loaded, "design", broken)
    monkeypatch.setattr(sys, "argv", ["coefc", "check", str(EXAMPLE)])
    with pytest.raises(SystemExit) as e:
        main()
    assert e.value.code == 3
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "internal error" in err and "ZeroDivisionError" in err


@pytest.mark.skipif(shutil.which("g++") is None or shutil.which("gcc") is None, reason="g++ is not installed")
def test_cpp_firmware_links_the_c_kernel(tmp_path):
    """Kernel headers carry extern "C" guards: C++ firmware compiled with g++ links
    the C kernel compiled with gcc and passes the golden vectors."""
    r = coefc("build", EXAMPLE, "--reference-kernel", "-o", tmp_path / "m.h")
    assert r.returncode == 0, r.stderr
    (tmp_path / "main.cpp").write_text(r"""
#include <cstdio>
#include "m.h"
int main() {
    static coefc_mcu32_state_t state[BENCH_MONITOR_MAX_STATE_WORDS];
    for (unsigned c = 0; c < BENCH_MONITOR_N_CHANNELS; ++c)
        if (coefc_mcu32_selftest(bench_monitor_channels[c], state, bench_monitor_golden_in,
                                 bench_monitor_golden_out[c], BENCH_MONITOR_GOLDEN_LEN) >= 0) return 1;
    std::printf("ok\n");
    return 0;
}
""")
    for cmd in (["gcc", "-std=c99", "-c", "coefc_mcu32.c", "-o", "k.o"],
                ["g++", "-std=c++11", "-Wall", "-Wextra", "-Werror", "-I.", "main.cpp", "k.o", "-o", "fw"],
                ["./fw"]):
        p = subprocess.run(cmd, cwd=tmp_path, capture_output=True, text=True, timeout=120)
        assert p.returncode == 0, " ".join(cmd) + "\n" + p.stdout + p.stderr
    assert p.stdout.strip() == "ok"


def test_output_into_the_target_folder_cannot_replace_its_files(tmp_path):
    from c_build import write_kernel

    board = tmp_path / "targets" / "board"  # mcu32 with kernel files of its own (no [kernel] family)
    shutil.copytree(Path(__file__).resolve().parents[1] / "targets" / "mcu32", board)
    write_kernel(board / "kernel", "mcu32")
    toml = board / "target.toml"
    toml.write_text("\n".join(t for t in toml.read_text().splitlines() if not t.startswith("family")) + "\n")
    before = (board / "kernel" / "coefc_mcu32.h").read_bytes()
    r = coefc("build", EXAMPLE, "--target-dir", tmp_path / "targets", "--target", "board", "--reference-kernel",
              "-o", board / "kernel" / "filters.h")
    assert r.returncode == 2 and "input" in r.stderr
    assert (board / "kernel" / "coefc_mcu32.h").read_bytes() == before
    assert not (board / "kernel" / "filters.h").exists()


@pytest.mark.parametrize("content,fragment", [
    (b"\xef\xbb\xbf1\n2\n", "byte-order mark"),
    ("\u0661\u0662\n".encode(), "plain ASCII"),           # Arabic-Indic digits: int() would take them
    (b"1_000\n", "not an integer"),                        # Python's digit separators: not a sample
    (b"\x00\x01\x02\n", "plain ASCII"),
])
def test_text_samples_are_plain_ascii_integers(tmp_path, content, fragment):
    (tmp_path / "in.txt").write_bytes(content)
    r = coefc("run", EXAMPLE, tmp_path / "in.txt", tmp_path / "out.txt")
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and fragment in r.stderr, r.stderr
    assert not (tmp_path / "out.txt").exists()


@pytest.mark.parametrize("value", ["1e39", "nan", "inf", "0x10"])
def test_float32_text_samples_are_finite_and_in_range(tmp_path, value):
    (tmp_path / "in.txt").write_text(f"0.5\n{value}\n")
    r = coefc("run", EXAMPLE, tmp_path / "in.txt", tmp_path / "out.txt", "--target", "float32")
    errors = [ln for ln in r.stderr.splitlines() if ln.startswith("coefc: error")]
    assert r.returncode == 2 and len(errors) == 1 and "in.txt:2" in errors[0], r.stderr


def test_description_limits_refuse_before_the_work(tmp_path):
    """Channels and file size are bounded before any design (the per-channel totals
    are in tests/bad/limit_*.toml)."""
    many = tmp_path / "many.toml"
    many.write_text('name = "x"\nsample_rate_hz = 48000\n' + "".join(
        f'[[channel]]\nname = "c{i}"\nstages = [{{ kind = "gain", db = 0 }}]\n' for i in range(65)))
    r = coefc("design", many)
    assert r.returncode == 2 and "at most 64" in r.stderr
    big = tmp_path / "big.toml"
    big.write_text('name = "x"\nsample_rate_hz = 48000\n' + "# padding\n" * 120_000)
    r = coefc("design", big)
    assert r.returncode == 2 and "at most 1024 KiB" in r.stderr


_TWO_WAY = '''name = "pair"
sample_rate_hz = 48000
[implementation]
structure = "df1ef"
[budget]
stopband_attenuation_db = 30
stopband = [[8000, 24000]]
[[channel]]
name = "low"
stages = [ { kind = "lowpass", response = "linkwitz-riley", order = 4, cutoff_hz = 2200 } ]
[[channel]]
name = "high"
stages = [ { kind = "highpass", response = "linkwitz-riley", order = 4, cutoff_hz = 2200 } ]
'''


def test_channel_budget_overrides_the_shared_one_and_the_command_line_wins(tmp_path):
    """A [channel.budget] table (TOML: a sub-table of the last [[channel]]) sets that channel's
    keys; the design contract's per-channel budgets.  An LR4 filter falls 24 dB per octave past
    its crossover (common practice, no source): the low-pass attenuates at least 30 dB from 8 kHz
    up (1.86 octaves above 2.2 kHz), the high-pass from 600 Hz down; judged on the low-pass's
    stopband, the high-pass (which passes it) fails."""
    shared = tmp_path / "shared.toml"
    shared.write_text(_TWO_WAY)
    r = coefc("check", shared, "--json", "-")
    assert r.returncode == 1
    chans = {c["name"]: c for c in json.loads(r.stdout)["channels"]}
    att = {n: next(k for k in c["checks"] if k["name"] == "stopband_attenuation_db") for n, c in chans.items()}
    assert att["low"]["ok"] and not att["high"]["ok"]

    own = tmp_path / "own.toml"
    own.write_text(_TWO_WAY + "[channel.budget]\nstopband = [[20, 600]]\nstopband_attenuation_db = 35\n")
    r = coefc("check", own, "--json", "-")
    assert r.returncode == 0, r.stdout[-3000:]
    chans = {c["name"]: c for c in json.loads(r.stdout)["channels"]}
    assert chans["high"]["budget"]["stopband"] == [[20.0, 600.0]]
    assert chans["high"]["budget"]["stopband_attenuation_db"] == 35
    assert chans["low"]["budget"]["stopband"] == [[8000.0, 24000.0]]
    assert chans["low"]["budget"]["stopband_attenuation_db"] == 30
    # a command-line override applies to every channel, over the channel's own key
    r = coefc("check", own, "--min-stopband-attenuation-db", "300", "--json", "-")
    chans = {c["name"]: c for c in json.loads(r.stdout)["channels"]}
    assert r.returncode == 1 and all(c["budget"]["stopband_attenuation_db"] == 300 for c in chans.values())


def test_channel_budget_errors_name_the_channel(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(_TWO_WAY + "[channel.budget]\nstopbnd = [[20, 600]]\n")
    r = coefc("check", bad)
    assert r.returncode == 2 and r.stderr.count("\n") == 1
    assert "channel 'high'" in r.stderr and "did you mean 'stopband'" in r.stderr


def test_build_takes_the_budget_overrides_and_force_names_the_failures(tmp_path):
    own = tmp_path / "own.toml"
    own.write_text(_TWO_WAY + "[channel.budget]\nstopband = [[20, 600]]\n")
    out = tmp_path / "pair.h"
    r = coefc("build", own, "-o", out, "--min-stopband-attenuation-db", "300")
    assert r.returncode == 1 and not out.exists() and "stopband_attenuation_db" in r.stderr
    r = coefc("build", own, "-o", out, "--min-stopband-attenuation-db", "300", "--force")
    assert r.returncode == 0 and out.exists()
    assert "over budget: channel 'low': stopband_attenuation_db" in r.stderr and "--force" in r.stderr
    assert "OVER BUDGET" in out.read_text()


def test_sweep_size_is_bounded_before_any_work():
    r = coefc("sweep", EXAMPLE, "--data", "2:64", "--coef", "2:64", "--structure", "df1,tdf2")
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "at most 4096" in r.stderr


def test_sweep_progress_is_plain_lines_off_a_terminal_with_an_estimate_up_front(capsys, monkeypatch):
    from coefc.cli.sweep_cmd import _progress

    monkeypatch.setattr(sys.stderr, "isatty", lambda: False)
    monkeypatch.setattr(_progress, "ESTIMATE_AFTER_S", 0.0)
    monkeypatch.setattr(_progress, "PLAIN_EVERY_S", 0.0)
    with _progress() as tick:
        time.sleep(0.01)
        for i in range(1, 4):
            tick(i, 3)
    lines = capsys.readouterr().err.splitlines()
    assert lines[0].startswith("coefc: sweep: 3 evaluations, about ")
    assert any("2 of 3 evaluated" in ln for ln in lines) and "\x1b" not in "".join(lines)


def test_float32_says_it_runs_df1ef_as_df1():
    probe = Path(__file__).resolve().parent / "cmake_project" / "filters" / "probe_front_end.toml"
    assert 'structure = "df1ef"' in probe.read_text()
    r = coefc("check", probe, "--target", "float32")
    assert "runs the description's df1ef as df1" in r.stderr


@pytest.mark.parametrize("name,channel,fragment", [
    ("int32", "t", "INT32_T"),                 # would redeclare <stdint.h>'s int32_t (ISO C99 7.18.1.1)
    ("INT32", "MIN", "INT32_MIN"),             # <stdint.h>'s limit macro (ISO C99 7.18.2.1)
    ("size", "t", "SIZE_T"),                   # <stddef.h> (ISO C99 7.17)
    ("coefc", "mcu32_reset", "kernel"),        # the mcu32 kernel's own function
])
def test_identifiers_that_would_not_compile_are_refused_by_check_and_build(tmp_path, name, channel, fragment):
    d = tmp_path / "id.toml"
    d.write_text(f'name = "{name}"\nsample_rate_hz = 48000\n[[channel]]\nname = "{channel}"\n'
                 'stages = [{ kind = "gain", db = -1 }]\n')
    for args in (("check", d), ("build", d, "-o", tmp_path / "id.h", "--reference-kernel")):
        r = coefc(*args)
        assert r.returncode == 2 and r.stderr.count("\n") == 1 and fragment in r.stderr, (args, r.stderr)
    assert not (tmp_path / "id.h").exists()


def _wav(channels: int, riff_size: int | None) -> bytes:
    """A 16-bit PCM WAV (RIFF/WAVE, 'fmt ' and 'data' chunks: the Microsoft RIFF layout,
    common practice, no source) with a chosen channel count and RIFF size."""
    import struct

    fmt = struct.pack("<HHIIHH", 1, channels, 48000, 96000 * max(channels, 1), 2 * max(channels, 1), 16)
    data = b"\x00\x01" * 8
    body = b"WAVE" + b"fmt " + struct.pack("<I", 16) + fmt + b"data" + struct.pack("<I", len(data)) + data
    return b"RIFF" + struct.pack("<I", len(body) if riff_size is None else riff_size) + body


@pytest.mark.parametrize("content,fragment", [(_wav(0, None), "0 channels"), (_wav(1, 0), "RIFF size")],
                         ids=["zero-channels", "riff-size-0"])
def test_damaged_wav_headers_are_bad_input(tmp_path, content, fragment):
    (tmp_path / "in.wav").write_bytes(content)
    r = coefc("run", EXAMPLE, tmp_path / "in.wav", tmp_path / "out.wav")
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and fragment in r.stderr, r.stderr


def test_huge_raw_coefficients_are_bad_input(tmp_path):
    d = tmp_path / "big.toml"
    d.write_text('name = "x"\nsample_rate_hz = 48000\n[[channel]]\nname = "a"\n'
                 'stages = [{ kind = "fir", taps = [1e308, 1e308, 1e308] }]\n')
    r = coefc("check", d)
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "1e+06" in r.stderr


def test_hints_never_suggest_what_is_already_in_use(tmp_path):
    from types import SimpleNamespace

    from coefc.budget import _remedies

    used = SimpleNamespace(structure="df1ef", scaling="l1", overflow_mode="saturate")
    text = _remedies(used, "df1ef", "gain", "l1", "saturate", "data")
    assert "df1ef" not in text and "l1" not in text and "saturation" not in text and "wider data word" in text
    fresh = SimpleNamespace(structure="df1", scaling="none", overflow_mode="wrap")
    assert _remedies(fresh, "df1ef", "l1", "saturate") == 'use error feedback (df1ef), scaling = "l1" or saturation'
    # through check: an A weighting in 12-bit df1 words overflows; the default l1 scaling is not offered
    d = tmp_path / "aw.toml"
    d.write_text('name = "aw"\nsample_rate_hz = 48000\n[[channel]]\nname = "a"\n'
                 'stages = [ { kind = "weighting", weighting = "A" } ]\n')
    r = coefc("check", d, "--data", "Q1.11", "--structure", "df1", "--json", "-")
    reasons = {c["name"]: c["reason"] for c in json.loads(r.stdout)["channels"][0]["checks"] if not c["ok"]}
    assert "overflow" in reasons and 'scaling = "l1"' not in reasons["overflow"]
    assert "error feedback (df1ef)" in reasons["limit_cycles"]


def test_run_warns_when_the_program_departs_from_the_design(tmp_path):
    """The three-way monitor's woofer on a 16-bit part puts quantised poles on the unit circle
    (issue 13's measurement); `run` still runs it but says so, from the note's kind."""
    (tmp_path / "in.txt").write_text("0\n1000\n0\n")
    r = coefc("run", EXAMPLE, tmp_path / "in.txt", tmp_path / "out.txt", "--target", "mcu16", "--channel", "woofer")
    assert r.returncode == 0, r.stderr
    assert "warning: channel 'woofer'" in r.stderr and ">= 1" in r.stderr
