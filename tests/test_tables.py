"""The table of checks (coefc.checks.CHECKS): every reader of it agrees with it.

Loops over every check in the table, so a new entry is exercised by these tests
without editing them.
"""

from __future__ import annotations

from types import SimpleNamespace

import pytest

from coefc.budget import _budget_dict, apply_overrides, channel_checks, with_defaults
from coefc.checks import BUDGET_CHECKS, CHECKS, HAZARD_DEFAULTS, OPTION_CHECKS, LimitError, kind_of
from coefc.cli import app
from coefc.errors import DescriptionError
from coefc.reports.text import render_junit, render_text
from coefc.spec import Budget, load_description

from test_budget import fake_metrics

# one good and one bad limit per budget key (the bad one breaks the key's own rule)
GOOD_BAD = {
    "passband_deviation_db": (0.05, -1.0),
    "stopband_attenuation_db": (80.0, 0.0),
    "alias_attenuation_db": (96.0, -3.0),
    "output_noise_dbfs": (-120.0, 3.0),
    "output_offset_lsb": (0.5, -0.5),
    "limit_cycles": ("none", "few"),
    "overflow": ("allow", "sometimes"),
    "tone_gain_error_db": ("off", "loud"),
    "correction_error_db": (0.5, 0.0),
}


def test_every_budget_check_has_a_good_and_a_bad_example():
    assert {c.name for c in BUDGET_CHECKS} == set(GOOD_BAD)


def test_names_are_unique_and_ops_known():
    assert len({c.name for c in CHECKS}) == len(CHECKS)
    assert {c.op for c in CHECKS} <= {"<=", ">=", "<"}
    # facts of the trade (common practice, no source): attenuation is a floor, deviation a ceiling,
    # a stable pole radius strictly below 1
    assert (kind_of("stopband_attenuation_db").op, kind_of("passband_deviation_db").op,
            kind_of("stable").op) == (">=", "<=", "<")


@pytest.mark.parametrize("check", BUDGET_CHECKS, ids=lambda c: c.name)
def test_budget_key_is_read_from_toml_and_validated(tmp_path, check):
    good, bad = GOOD_BAD[check.name]
    text = '"' + good + '"' if isinstance(good, str) else repr(good)
    p = tmp_path / "b.toml"
    body = ('name = "b"\nsample_rate_hz = 48000\n[budget]\n{key} = {value}\n'
            '[[channel]]\nname = "x"\nstages = [ {{ kind = "gain", db = -6.0 }} ]\n')
    p.write_text(body.format(key=check.name, value=text))
    assert getattr(load_description(p).budget, check.name) == good
    p.write_text(body.format(key=check.name, value='"' + bad + '"' if isinstance(bad, str) else repr(bad)))
    with pytest.raises(DescriptionError, match=f"budget.{check.name}"):
        load_description(p)
    with pytest.raises(LimitError):
        check.validate(bad)


@pytest.mark.parametrize("check", OPTION_CHECKS, ids=lambda c: c.name)
def test_option_overrides_its_key_and_names_itself(check):
    good, bad = GOOD_BAD[check.name]
    b = apply_overrides(Budget(), **{check.name: str(good) if check.text_option else good})
    assert getattr(b, check.name) == good and check.name in b.command_line
    with pytest.raises(DescriptionError, match=check.option):
        apply_overrides(Budget(), **{check.name: str(bad) if check.text_option else bad})


@pytest.mark.parametrize("command", ["check", "build"])
def test_check_and_build_declare_every_override_option(command):
    cmd = next(c for c in app.registered_commands if c.callback.__name__ == command)
    import typer.main

    click_cmd = typer.main.get_command_from_info(cmd, pretty_exceptions_short=True, rich_markup_mode=None)
    declared = {o for p in click_cmd.params for o in p.opts}
    assert {c.option for c in OPTION_CHECKS} <= declared


def test_json_budget_names_every_budget_key_and_defaults_come_from_the_table():
    b, defaults = with_defaults(Budget())
    assert set(defaults) == {k for k, _ in HAZARD_DEFAULTS}
    assert {c.name for c in BUDGET_CHECKS} <= set(_budget_dict(b))


def test_reports_print_the_tables_comparison():
    # a failing stopband row shows '>=' and a failing deviation row '<=' (the checks' own comparisons)
    m = fake_metrics()
    m.response.stopband_attenuation_db = 70.0
    m.response.float_stopband_attenuation_db = 90.0
    m.response.passband_deviation_db = 0.2
    checks, why = channel_checks(m, Budget(stopband_attenuation_db=80.0, passband_deviation_db=0.05))
    ch = SimpleNamespace(name="x", ok=False, checks=checks, reasons=why, sample_rate_hz=48000.0, metrics={},
                         arithmetic={"kind": "fixed", "structure": "df1", "data": "Q1.15", "coef": "Q2.14",
                                     "acc_bits": 32, "rounding": "add-half", "overflow": "saturate"})
    report = SimpleNamespace(channels=[ch], target="mcu32", source="x.toml", ok=False,
                             failures=lambda: [("x", c, "") for c in checks if not c.ok])
    assert {c.name: c.op for c in checks if c.name != "stable"} == {"stopband_attenuation_db": ">=",
                                                                    "passband_deviation_db": "<="}
    text = render_text(report)
    assert ">= 80" in text and "<= 0.05" in text
    junit = render_junit(report)
    assert "limit &gt;= 80" in junit and "limit &lt;= 0.05" in junit


# ---------------------------------------------------------------- the tables of stage kinds (coefc.stagekinds)

from coefc.design import _designer  # noqa: E402
from coefc.spec import STAGE_KEYS  # noqa: E402
from coefc.stagekinds import IIR_RESPONSE_DESIGNERS, STAGE_KINDS_TABLE  # noqa: E402


@pytest.mark.parametrize("kind", list(STAGE_KINDS_TABLE))
def test_every_stage_kind_is_validated_and_routed_from_its_table(kind):
    sk = STAGE_KINDS_TABLE[kind]
    assert set(STAGE_KEYS[kind]) == set(sk.keys)
    # units follow the key's suffix (common practice, no source: the project's naming convention)
    for key, k in sk.keys.items():
        for suffix, unit in (("_hz", "Hz"), ("_db", "dB"), ("_oct", "octaves")):
            if key.endswith(suffix):
                assert k.unit == unit, (kind, key)
    responses = [None] if sk.designer is not None else list(IIR_RESPONSE_DESIGNERS)
    for response in responses:
        params = {} if response is None else {"response": response}
        ctx = SimpleNamespace(kind=kind, require=lambda key, hint, p=params: p[key])
        fn = _designer(ctx)
        module, name = (sk.module, sk.designer) if response is None else IIR_RESPONSE_DESIGNERS[response]
        assert fn.__module__ == f"coefc.design.{module}" and fn.__name__ == name


# ---------------------------------------------------------------- the table of structures (coefc.program)

import numpy as np  # noqa: E402

import coefc  # noqa: E402
import exact_model  # noqa: E402
from coefc.analyse import AnalysisOptions, analyse_channel  # noqa: E402
from coefc.emit.codegen import cost_of  # noqa: E402
from coefc.program import STRUCTURE_TABLE, SectionOp  # noqa: E402
from coefc.simulate import simulate  # noqa: E402
from coefc.targetspec import Overrides, list_targets  # noqa: E402

from conftest import FILTERS  # noqa: E402


@pytest.fixture(scope="module")
def tweeter_by_structure():
    loaded = coefc.load(FILTERS / "three_way_monitor.toml").design(["tweeter"])
    out = {}
    mcu32 = loaded.target("mcu32")
    for s in STRUCTURE_TABLE:  # on mcu32, or on mcu16 for a structure only it runs (df1ef-wide)
        real = loaded.realise("mcu32" if s in mcu32.structures else "mcu16", Overrides(structure=s))
        prog = real.programs[0]
        out[s] = (prog, analyse_channel(real.design.channels[0], prog, AnalysisOptions()))
    return out


@pytest.mark.parametrize("name", list(STRUCTURE_TABLE))
def test_every_structure_runs_through_every_model(name, tweeter_by_structure):
    st_ = STRUCTURE_TABLE[name]
    prog, m = tweeter_by_structure[name]
    assert all(op.structure == name for op in prog.ops if isinstance(op, SectionOp))
    # the engine against the independent exact model of tests/exact_model.py
    x = np.random.default_rng(5).integers(-(1 << 15), 1 << 15, 4000).tolist()
    assert simulate(prog, np.array(x, dtype=np.int64)).tolist() == exact_model.run_program(prog, x)[0]
    # the noise model of the structure against the bit-true measurement: within 2 dB
    # (common practice, no source: an additive white roundoff model predicts the measured
    # output noise of a well-scaled filter to about a dB)
    assert abs(m.noise.dbfs - m.measured.dbfs) < 2.0, (m.noise.dbfs, m.measured.dbfs)
    # the limit-cycle model gives every section a verdict
    assert {s.status for s in m.limit_cycles.sections} <= {"none", "found", "unproven"}
    # generated code: one more add per section with error feedback
    n_sec = sum(isinstance(op, SectionOp) for op in prog.ops)
    base = cost_of(prog)["adds_per_sample"] - sum(len(op.taps) - 1 for op in prog.ops if hasattr(op, "taps"))
    assert base >= n_sec * (4 + st_.error_feedback)
    # some built-in fixed-point target runs it, so the C-kernel golden-vector tests cover it
    assert any(name in t.structures and not t.arithmetic.is_float for t in list_targets())


# ---------------------------------------------------------------- errors keep their type

def test_realisation_errors_keep_their_type_and_name_the_file(monkeypatch):
    import coefc.realise
    from coefc.realise import RealisationError

    def refuse(channel, arith):
        raise RealisationError(f"channel '{channel.name}': refused")

    monkeypatch.setattr(coefc.realise, "realise_channel", refuse)
    path = FILTERS / "three_way_monitor.toml"
    with pytest.raises(RealisationError) as info:
        coefc.load(path).design(["tweeter"]).realise("mcu32")
    assert info.value.source == str(path) and str(info.value) == f"{path}: channel 'tweeter': refused"
