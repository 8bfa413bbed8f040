"""Hostile inputs against the merge gate: each attempt runs coefc in a fresh process
with a time limit and reports its exit code, whether a traceback leaked, its time and
its peak memory.  Prints one line per attempt and a summary by exit code.

    python bench/attack_gate.py            # all attempts, 120 s limit each

The bar (README, "Exit codes"): bad input exits 2 with one line, never a traceback,
never exit 1 (which a merge gate reads as "over budget"), and no attempt hangs.
"""

from __future__ import annotations

import os
import resource
import struct
import subprocess
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "filters" / "three_way_monitor.toml"
MAIN = "from coefc.cli import main; main()"
HEAD = 'name = "x"\nsample_rate_hz = 48000\n'


def desc(stages: str, extra: str = "") -> str:
    return HEAD + extra + f'[[channel]]\nname = "a"\nstages = [{stages}]\n'


def wav(channels: int, riff: int | None, bits: int = 16) -> bytes:
    fmt = struct.pack("<HHIIHH", 1, channels, 48000, 48000 * 2 * max(channels, 1), 2 * max(channels, 1), bits)
    data = b"\x00\x01" * 8
    body = b"WAVE" + b"fmt " + struct.pack("<I", 16) + fmt + b"data" + struct.pack("<I", len(data)) + data
    return b"RIFF" + struct.pack("<I", len(body) if riff is None else riff) + body


def attempts(tmp: Path):
    """(name, argv, files to write) for every attempt."""
    d = {
        "deep-array": HEAD + "z = " + "[" * 5000 + "]" * 5000 + "\n",
        "deep-dotted-key": HEAD + "a" + ".a" * 20000 + " = 1\n",
        "deep-inline-table": HEAD + "z = " + "{a = " * 3000 + "1" + "}" * 3000 + "\n",
        "huge-taps": desc("{ kind = \"fir\", taps = [1e308, 1e308, 1e308] }"),
        "many-fir": desc(", ".join(["{ kind = \"fir-lowpass\", passband_hz = 1000, stopband_hz = 1500, "
                                    "attenuation_db = 60, taps = 8191 }"] * 50)),
        "many-iir": desc(", ".join(["{ kind = \"lowpass\", response = \"butterworth\", order = 40, "
                                    "cutoff_hz = 1000 }"] * 100)),
        "many-delays": desc(", ".join(["{ kind = \"delay\", samples = 1048576 }"] * 1000)),
        "ls-8191": desc("{ kind = \"fir-lowpass\", method = \"least-squares\", passband_hz = 1000, "
                        "stopband_hz = 1010, attenuation_db = 60, taps = 8191 }"),
        "nan-rate": HEAD.replace("48000", "nan") + '[[channel]]\nname = "a"\nstages = [{ kind = "gain", db = 0 }]\n',
        "int32-t": 'name = "int32"\nsample_rate_hz = 48000\n[[channel]]\nname = "t"\nstages = [{ kind = "gain", db = 0 }]\n',
        "kernel-name": 'name = "coefc"\nsample_rate_hz = 48000\n[[channel]]\nname = "mcu32_reset"\n'
                       'stages = [{ kind = "gain", db = 0 }]\n',
        "big-file": HEAD + "# pad\n" * 200000,
        "utf16": None,
        "channels-65": HEAD + "".join(f'[[channel]]\nname = "c{i}"\nstages = [{{ kind = "gain", db = 0 }}]\n'
                                      for i in range(65)),
    }
    out = []
    for name, text in d.items():
        f = tmp / f"{name}.toml"
        if text is None:
            f.write_bytes(HEAD.encode("utf-16"))
        else:
            f.write_text(text)
        out.append((f"check {name}", ["check", str(f)]))
    samples = {"bom.txt": b"\xef\xbb\xbf1\n", "binary.txt": bytes(range(256)), "digits.txt": "\u0661\n".encode(),
               "ch0.wav": wav(0, None), "riff0.wav": wav(1, 0), "bits7.wav": wav(1, None, 7),
               "empty.wav": b"", "trunc.wav": wav(1, None)[:30]}
    for name, blob in samples.items():
        (tmp / name).write_bytes(blob)
        out.append((f"run {name}", ["run", str(EXAMPLE), str(tmp / name), str(tmp / "o.txt")]))
    board = tmp / "targets" / "board"
    import shutil
    shutil.copytree(ROOT / "targets" / "mcu32", board)
    t = (board / "target.toml").read_text()
    (board / "target.toml").write_text(t.replace('sources = ["kernel/coefc_mcu32.c"]',
                                                 'sources = ["/proc/self/environ"]'))
    out.append(("build environ-source", ["build", str(EXAMPLE), "--target-dir", str(tmp / "targets"), "--target",
                                         "board", "--reference-kernel", "-o", str(tmp / "fw" / "x.h")]))
    (tmp / "fw").mkdir()
    out.append(("sweep 1M", ["sweep", str(EXAMPLE), "--data", "2:64", "--coef", "2:64", "--acc", "2:64"]))
    out.append(("check noise 1e9", ["check", str(EXAMPLE), "--noise-samples", "1000000000"]))
    out.append(("check --json dir", ["check", str(EXAMPLE), "--json", str(tmp)]))
    return out


def run(argv, limit: float):
    t0 = time.monotonic()
    p = subprocess.Popen([sys.executable, "-c", MAIN, *argv], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                         text=True)
    try:
        _, err = p.communicate(timeout=limit)
        hung = False
    except subprocess.TimeoutExpired:
        p.kill()
        _, err = p.communicate()
        hung = True
    return p.returncode, err, time.monotonic() - t0, hung


def main() -> None:
    limit = float(sys.argv[1]) if len(sys.argv) > 1 else 120.0
    with tempfile.TemporaryDirectory() as d:
        rows = []
        for name, argv in attempts(Path(d)):
            before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
            rc, err, secs, hung = run(argv, limit)
            peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
            tb = "Traceback" in err
            rows.append((name, rc, tb, secs, hung, max(peak, before)))
            first = (err.strip().splitlines() or [""])[-1][:90]
            print(f"{name:<28} exit {rc!s:>4}  {'TRACEBACK ' if tb else ''}{'HUNG ' if hung else ''}"
                  f"{secs:6.1f} s  peak<= {peak / 1024:6.0f} MB  {first}")
    codes = Counter(r[1] for r in rows)
    print(f"\n{len(rows)} attempts; exit codes {dict(sorted(codes.items(), key=str))}; "
          f"tracebacks {sum(r[2] for r in rows)}; hangs {sum(r[4] for r in rows)}; "
          f"slowest {max(r[3] for r in rows):.1f} s; peak memory (any child so far) "
          f"{max(r[5] for r in rows) / 1024:.0f} MB")


if __name__ == "__main__":
    main()
