"""The self-contained HTML report (`coefc report`, coefc.reports.html).

References: scipy.signal.butter(output="zpk") for the poles and zeros the report
plots; scipy.signal.group_delay for the group delay; the reciprocal zero pairs of a
linear-phase FIR (A. V. Oppenheim, R. W. Schafer, "Discrete-Time Signal Processing",
3rd ed., section 5.7.3 -- from memory); the check report itself (coefc.budget) for
every number the page shows.  The page is loaded in a real headless browser
(Debian's chromium) with the network cut off.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
from scipy import signal

import coefc
from coefc.budget import run_check
from coefc.reports.html import (_group_delay, _runs, fir_zeros, op_rows, poles_zeros, render_comparison,
                               render_report, section_rows)

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
            for v in s["b"] + s["a"]:
                assert f'<span class="int">{v}</span>' in html
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


@pytest.fixture(scope="module")
def monitor_page():
    path = FILTERS / "three_way_monitor.toml"
    loaded = coefc.load(path)
    real = loaded.design().realise()
    rep = run_check(real, loaded.description.budget)
    return rep, real, render_report(rep, real)


def test_page_numbers_ops_and_sections_alike_and_shows_every_integer(monitor_page):
    rep, real, html = monitor_page
    for prog in real.programs:
        rows = op_rows(prog)
        assert [r["op"] for r in rows] == list(range(1, len(prog.ops) + 1))
        for sec, op, _ in section_rows(prog):  # the zoomed views name both numbers, as the limit-cycle table does
            assert f"section {sec} (op {op})" in html
            assert rows[op - 1]["section"] == sec
        for op in prog.ops:
            if hasattr(op, "coef"):  # gain ops: their integer is on the page
                assert f'<span class="int">{op.coef}</span>' in html
    # the woofer has no delay: section k is op k; the mid's delay op 1 shifts its sections by one
    assert "section 1 (op 2)" in html


def test_page_shows_phase_group_delay_zoom_and_the_sum(monitor_page):
    rep, real, html = monitor_page
    n = len(rep.channels)
    for plot in ("magnitude", "phase", "pole-zero", "pole-zoom"):
        assert html.count(f'data-plot="{plot}"') == n, plot
    assert html.count('data-plot="sum"') == 1 and "Sum <code>acoustic</code>" in html
    assert "<td>sum_deviation_db</td>" in html and "passband deviation limit 0.05 dB" in html
    assert "more than 4 bits" not in html


def test_group_delay_matches_scipy():
    # Reference: scipy.signal.group_delay of a 4th-order Butterworth low-pass.
    b, a = signal.butter(4, 2000, fs=48000)
    f = np.geomspace(10, 20000, 200)
    _, ref = signal.group_delay((b, a), w=f, fs=48000)
    got = _group_delay(lambda x: signal.freqz(b, a, worN=x, fs=48000)[1], f, 48000)
    assert np.allclose(got, ref, rtol=1e-4, atol=1e-4)


def test_runs_of_a_mask():
    # exhaustive over every mask of 8 points: the runs cover exactly the true points, each run maximal
    for bits in range(256):
        m = np.array([(bits >> i) & 1 for i in range(8)], bool)
        runs = _runs(m)
        cover = np.zeros(8, bool)
        for i, j in runs:
            assert i < j and m[i:j].all() and (i == 0 or not m[i - 1]) and (j == 8 or not m[j])
            cover[i:j] = True
        assert (cover == m).all()


def test_fir_zeros_come_in_reciprocal_pairs():
    # Linear-phase FIR (symmetric taps): every zero z off the unit circle has its partner 1/conj(z)
    # (Oppenheim & Schafer, section 5.7.3, from memory).
    d = coefc.load(FILTERS / "decimator_192k.toml").design()
    real = d.realise()
    fz, rz = fir_zeros(d.channels[0], real.programs[0])
    taps = sum(len(b.taps) - 1 for b in d.channels[0].blocks if hasattr(b, "taps"))
    assert len(fz) == taps and len(rz) > 0
    off = fz[np.abs(np.abs(fz) - 1) > 1e-3]
    assert len(off) > 0
    for z in off:
        assert np.min(np.abs(fz - 1 / np.conj(z))) < 1e-3 * max(1, abs(1 / z))


def test_stopband_mask_drawn_where_a_stopband_is_checked():
    path = FILTERS / "decimator_192k.toml"
    loaded = coefc.load(path)
    real = loaded.design().realise()
    html = render_report(run_check(real, loaded.description.budget), real)
    assert "stopband mask: at least 96 dB below the passband" in html
    assert "FIR, " in html and "<summary>taps</summary>" in html  # the FIR integers, folded away


def test_report_old_against_new(tmp_path):
    from test_sums import THREE_WAY

    runs = []
    for name, inv in (("old.toml", "false"), ("new.toml", "true")):
        p = tmp_path / name
        p.write_text(THREE_WAY.format(invert=inv))
        loaded = coefc.load(p)
        real = loaded.design().realise()
        runs.append((run_check(real, loaded.description.budget), real))
    html = render_comparison(*runs)
    assert "OLD against NEW" in html and str(tmp_path / "old.toml") in html and str(tmp_path / "new.toml") in html
    assert html.count('data-plot="compare"') == 3
    # the sum's row: passing in OLD, failing in NEW
    row = re.search(r"<td>sum_deviation_db</td>\s*<td class=\"num (\w+)\">.*?</td>\s*<td class=\"num (\w+)\">", html, re.S)
    assert row and row.groups() == ("pass", "fail")
    parser = _Collect()
    parser.feed(html)
    assert "script" not in parser.tags and parser.external == []


def _chromium():
    for name in ("chromium", "chromium-browser"):
        if shutil.which(name):
            return shutil.which(name)
    pytest.skip("chromium is not installed (Debian: apt-get install chromium); the page was not tried in a browser")


def test_page_in_a_headless_browser_offline(tmp_path, monitor_page):
    """Debian's chromium loads the page with every network request refused; the plots are in its DOM."""
    browser = _chromium()
    rep, real, html = monitor_page
    page = tmp_path / "report.html"
    page.write_text(html)
    # no network: every host name resolves to nothing and every proxy request goes to a closed port
    offline = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
               "--disable-component-update", "--disable-sync", "--host-resolver-rules=MAP * ~NOTFOUND",
               "--proxy-server=127.0.0.1:9", f"--user-data-dir={tmp_path / 'profile'}"]
    dom = subprocess.run([browser, *offline, "--dump-dom", page.as_uri()], capture_output=True, text=True,
                         timeout=180)
    assert dom.returncode == 0, dom.stderr[-2000:]
    parser = _Collect()
    parser.feed(dom.stdout)
    assert parser.external == []
    n = len(rep.channels)
    assert parser.tags.count("svg") >= 4 * n + 1  # magnitude, phase, poles, zoom per channel, and the sum
    for ch in rep.channels:
        assert f"Channel <code>{ch.name}</code>" in dom.stdout
    out = Path(os.environ.get("COEFC_ARTEFACTS", tmp_path))
    out.mkdir(parents=True, exist_ok=True)
    shot = out / "three_way_monitor_report.png"
    r = subprocess.run([browser, *offline, "--window-size=1200,4000", f"--screenshot={shot}", page.as_uri()],
                       capture_output=True, text=True, timeout=180)
    assert r.returncode == 0, r.stderr[-2000:]
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 50_000  # a drawn page
