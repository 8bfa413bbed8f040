"""The self-contained HTML report (`coefc report`, coefc.reports.html).

References: scipy.signal.butter(output="zpk") for the poles and zeros the report
plots; the check report itself (coefc.budget) for every number the page shows.
"""

from __future__ import annotations

import subprocess
import sys
from html.parser import HTMLParser

import numpy as np
import pytest
from scipy import signal

import coefc
from coefc.budget import run_check
from coefc.reports.html import poles_zeros, render_report

from conftest import FILTERS

pytest.importorskip("matplotlib")

LOWPASS = """
name = "report_lp"
sample_rate_hz = 48000

[budget]
passband_deviation_db = 0.01

[[channel]]
name = "lp"
stages = [ { kind = "lowpass", response = "butterworth", order = 4, cutoff_hz = 2000 } ]
"""


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.external = [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for k, v in attrs:
            if k in ("src", "href") and v and not v.startswith("#"):
                self.external.append((tag, k, v))


def test_poles_and_zeros_match_scipy_butterworth(tmp_path):
    # Reference: scipy.signal.butter(4, 2000, fs=48000, output="zpk").
    p = tmp_path / "lp.toml"
    p.write_text(LOWPASS)
    d = coefc.load(p).design()
    real = d.realise("mcu32")
    fz, fp, rz, rp = poles_zeros(d.channels[0], real.programs[0])
    z_ref, p_ref, _ = signal.butter(4, 2000, fs=48000, output="zpk")
    assert np.allclose(np.sort_complex(fp), np.sort_complex(p_ref), atol=1e-9)
    assert np.allclose(np.sort_complex(rp), np.sort_complex(p_ref), atol=1e-6)  # Q2.30 coefficients
    assert len(fz) == len(z_ref) == 4 and np.allclose(fz, -1, atol=1e-3)  # four zeros at z = -1


def test_report_is_self_contained_and_shows_the_check(tmp_path):
    path = FILTERS / "three_way_monitor.toml"
    loaded = coefc.load(path)
    real = loaded.design().realise()
    rep = run_check(real, loaded.description.budget)
    html = render_report(rep, real)
    parser = _Collect()
    parser.feed(html)
    assert "script" not in parser.tags and parser.external == []  # loads nothing from elsewhere
    assert parser.tags.count("svg") >= 3 * 2
    for ch in rep.channels:
        assert f"Channel <code>{ch.name}</code>" in html
        for c in ch.checks:
            assert f"<td>{c.name}</td>" in html
        for s in ch.sections:  # the realised integers, as the chip stores them
            assert f'<td class="num">{s["b"][0]}</td>' in html
    assert "AES17" in html and "Caution" in html
    assert render_report(rep, real) == html  # identical inputs, identical page


def run_cli(*args):
    return subprocess.run([sys.executable, "-c", "from coefc.cli import main; main()", *args],
                          capture_output=True, text=True, timeout=300)


def test_cli_report(tmp_path):
    out = tmp_path / "r.html"
    r = run_cli("report", str(FILTERS / "decimator_192k.toml"), "-o", str(out))
    assert r.returncode == 0, r.stderr
    assert out.read_text().startswith("<!DOCTYPE html>")
    bad = run_cli("report", str(FILTERS / "decimator_192k.toml"), "-o", str(tmp_path / "r.pdf"))
    assert bad.returncode == 2 and "Traceback" not in bad.stderr
    assert not (tmp_path / "r.pdf").exists()
