"""Loading descriptions: the validated model, and nothing but DescriptionError on bad input."""

from __future__ import annotations

import hashlib
import json
import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from coefc.errors import DescriptionError
from coefc.spec import STAGE_KEYS, load_description, parse_description

from conftest import FILTERS


def test_example_loads_into_the_model():
    path = FILTERS / "three_way_monitor.toml"
    d = load_description(path)
    assert d.name == "bench_monitor"
    assert d.sample_rate_hz == 48000.0
    assert d.implementation.target == "mcu32"
    assert d.implementation.structure == "df1ef"
    assert d.implementation.scaling == "l1"
    assert d.budget.limit_cycles == "none"
    assert d.budget.overflow == "none"
    assert [c.name for c in d.channels] == ["woofer", "mid", "tweeter"]
    first = d.channels[0].stages[0]
    assert first.index == 1 and first.kind == "highpass"
    assert first.params["order"] == 2 and isinstance(first.params["order"], int)
    assert d.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert d.source == str(path)


def test_budget_bands_and_numbers():
    d = load_description(FILTERS / "decimator_88k2.toml")
    assert d.budget.passband == ((0.0, 20000.0),)
    assert d.budget.stopband == ((22050.0, 44100.0),)
    assert d.budget.stopband_attenuation_db == 96.0


def test_limit_cycles_may_be_a_number_of_lsb():
    text = (b'name = "x"\nsample_rate_hz = 48000\n[budget]\nlimit_cycles = 2\n'
            b'[[channel]]\nname = "a"\nstages = [{ kind = "gain", db = -1 }]\n')
    assert parse_description(text, "x.toml").budget.limit_cycles == 2.0


def test_channel_lookup_suggests_a_close_name():
    d = load_description(FILTERS / "three_way_monitor.toml")
    assert d.channel("mid").name == "mid"
    with pytest.raises(DescriptionError, match="did you mean 'tweeter'"):
        d.channel("tweter")


def test_syntax_error_reports_the_line():
    text = b'name = "x"\nsample_rate_hz = 48000\n\n[[channel]\n'
    with pytest.raises(DescriptionError) as e:
        parse_description(text, "x.toml")
    assert e.value.line == 4
    assert str(e.value).startswith("x.toml:4: TOML syntax error")


def test_bands_are_tuples_and_edges_below_nyquist():
    text = (b'name = "x"\nsample_rate_hz = 8000\n[[channel]]\nname = "a"\n'
            b'stages = [{ kind = "bandpass", response = "butterworth", order = 2, cutoff_hz = [300, 3400] }]\n')
    st_ = parse_description(text).channels[0].stages[0]
    assert st_.params["cutoff_hz"] == (300.0, 3400.0)
    with pytest.raises(DescriptionError, match=r"sample_rate_hz=8000 -> 4000 Hz"):
        parse_description(text.replace(b"3400", b"4000"))


# ---------------------------------------------------------------- property test
#
# Arbitrary TOML-shaped documents: right keys with wrong values, wrong keys,
# wrong nesting.  Loading plus designing must either succeed or raise
# DescriptionError -- never another exception (and, with pytest's
# filterwarnings=error, never a warning).


def toml_value(v) -> str:
    """A tiny TOML writer for generated values (inline tables and arrays only)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{json.dumps(k)} = {toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(v)


def toml_doc(doc: dict) -> bytes:
    return "\n".join(f"{json.dumps(k)} = {toml_value(v)}" for k, v in doc.items()).encode()


WORDS = sorted({*STAGE_KEYS, "butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel", "linkwitz-riley",
                "biquad", "kaiser", "equiripple", "least-squares", "A", "C", "none", "allow", "Q1.15", "Q2.30",
                "df1", "tdf2", "add-half", "wrap", "l2", "mcu32", "woofer", "int", "", "x y"})
NUMBERS = [0, 1, 2, 3, 4, 8, 45, -1, 0.5, 0.707, 6.0, 60.0, 100.0, 440.0, 1000.0, 2000.0, 2500, 8000,
           20000, 23999.0, 24000, 30000, 1e9, -1e-3, 48000]
scalars = st.one_of(
    st.booleans(),
    st.sampled_from(NUMBERS),
    st.integers(-(2**70), 2**70),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from(WORDS),
    st.text(alphabet=st.characters(codec="ascii", categories=("L", "N", "P")), max_size=8),
)
values = st.recursive(scalars, lambda inner: st.one_of(st.lists(inner, max_size=7),
                                                         st.dictionaries(st.sampled_from(WORDS), inner, max_size=4)),
                      max_leaves=12)
stage_keys = sorted({k for keys in STAGE_KEYS.values() for k in keys} | {"kind", "cutof_hz"})
frequencies = st.sampled_from([100.0, 200.0, 1000.0, 1200.0, 3000.0, 5000.0, 9000.0, 10000.0, 20000.0])
edges = st.one_of(frequencies, st.lists(frequencies, min_size=2, max_size=2), values)
stage_values = {
    "kind": st.sampled_from(sorted(STAGE_KEYS) + ["lowpas", 3]),
    "order": st.one_of(st.integers(-2, 12), values),
    "cutoff_hz": edges, "passband_hz": edges, "stopband_hz": edges, "freq_hz": edges,
    "taps": st.one_of(st.integers(1, 301), st.lists(st.sampled_from(NUMBERS + [0.25, -0.5]), min_size=1, max_size=9),
                      values),
    "sections": st.one_of(st.lists(st.lists(st.sampled_from([0.0, 1.0, -1.0, 0.5, -0.5, 0.25, 2.0, -1.9, 0.95]),
                                            min_size=6, max_size=6), min_size=1, max_size=3), values),
    "b": st.one_of(st.lists(st.sampled_from([0.0, 1.0, -1.0, 0.5, 0.3]), min_size=1, max_size=5), values),
    "a": st.one_of(st.lists(st.sampled_from([0.0, 1.0, -1.0, 0.5, -0.9, 0.2]), min_size=1, max_size=5), values),
    "attenuation_db": st.one_of(st.sampled_from([20.0, 40.0, 60.0, 80.0]), values),
    "ripple_db": st.one_of(st.sampled_from([0.1, 0.5, 1.0, 3.0]), values),
}
stage_values.update({
    "response": st.sampled_from(["butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel", "linkwitz-riley",
                                 "biquad", "cheby"]),
    "method": st.sampled_from(["kaiser", "equiripple", "least-squares", "remes"]),
    "weighting": st.sampled_from(["A", "C", "B"]),
    "q": st.sampled_from([0.1, 0.5, 0.707, 2.0, 30.0, 0.0]),
    "bandwidth_oct": st.sampled_from([0.1, 1.0, 3.0, 12.0]),
    "slope": st.sampled_from([0.5, 1.0, 2.0, 8.0]),
    "gain_db": st.sampled_from([-60.0, -6.0, 0.0, 3.0, 12.0, 80.0]),
    "db": st.sampled_from([-300.0, -6.0, 0.0, 6.0]),
    "linear": st.sampled_from([0.5, 2.0, 1e-12]),
    "invert": st.booleans(),
    "samples": st.integers(-2, 2000),
    "ms": st.sampled_from([0.0, 0.1, 2.5, 1e6]),
    "metres": st.sampled_from([0.0, 0.01, 3.0]),
    "air_temperature_c": st.sampled_from([-30.0, 0.0, 20.0, 35.0]),
})


TEMPLATES = [
    {"kind": "lowpass", "response": "butterworth", "order": 4, "cutoff_hz": 1000.0},
    {"kind": "highpass", "response": "chebyshev1", "order": 3, "cutoff_hz": 200.0, "ripple_db": 0.5},
    {"kind": "bandpass", "response": "chebyshev2", "order": 2, "cutoff_hz": [300.0, 3000.0], "attenuation_db": 40.0},
    {"kind": "bandstop", "response": "elliptic", "order": 2, "cutoff_hz": [900.0, 1100.0], "ripple_db": 1.0,
     "attenuation_db": 50.0},
    {"kind": "lowpass", "response": "bessel", "order": 5, "cutoff_hz": 5000.0},
    {"kind": "lowpass", "response": "elliptic", "passband_hz": 3000.0, "stopband_hz": 3600.0, "ripple_db": 0.1,
     "attenuation_db": 80.0},
    {"kind": "bandpass", "response": "butterworth", "passband_hz": [1000.0, 2000.0], "stopband_hz": [500.0, 4000.0],
     "ripple_db": 1.0, "attenuation_db": 40.0},
    {"kind": "highpass", "response": "linkwitz-riley", "order": 4, "cutoff_hz": 2500.0},
    {"kind": "bandpass", "response": "biquad", "freq_hz": 1000.0, "bandwidth_oct": 1.0},
    {"kind": "fir-lowpass", "passband_hz": 5000.0, "stopband_hz": 7000.0, "attenuation_db": 60.0},
    {"kind": "fir-bandstop", "method": "equiripple", "passband_hz": [1000.0, 9000.0], "stopband_hz": [3000.0, 5000.0],
     "attenuation_db": 40.0},
    {"kind": "fir-highpass", "method": "least-squares", "passband_hz": 3000.0, "stopband_hz": 1000.0,
     "attenuation_db": 50.0},
    {"kind": "lowshelf", "freq_hz": 200.0, "gain_db": 6.0, "slope": 1.0},
    {"kind": "peaking", "freq_hz": 1000.0, "gain_db": -3.0, "q": 2.0},
    {"kind": "delay", "metres": 1.5, "air_temperature_c": 30.0},
]


@st.composite
def mutated_template(draw):
    """A valid stage with a few keys changed, dropped or added."""
    out = dict(draw(st.sampled_from(TEMPLATES)))
    for k in list(out):
        roll = draw(st.integers(0, 19))
        if roll == 0:
            del out[k]
        elif roll <= 3:
            out[k] = draw(stage_values.get(k, values))
        elif roll == 4:
            out[k] = draw(values)
    if draw(st.integers(0, 4)) == 0:
        k = draw(st.sampled_from(stage_keys))
        out[k] = draw(stage_values.get(k, values))
    return out


def stages():
    return st.one_of(mutated_template(), free_stages())


@st.composite
def free_stages(draw):
    """A stage: mostly keys that belong to its kind, often valid values, sometimes junk."""
    kind = draw(stage_values["kind"])
    own = sorted(STAGE_KEYS.get(kind, {})) if isinstance(kind, str) else []
    keys = draw(st.lists(st.sampled_from(own or stage_keys), unique=True, max_size=max(1, len(own))))
    if draw(st.integers(0, 9)) == 0:
        keys.append(draw(st.sampled_from(stage_keys)))
    out = {"kind": kind}
    for k in keys:
        if k == "kind":
            continue
        junk = draw(st.integers(0, 9)) == 0
        out[k] = draw(values if junk else stage_values.get(k, values))
    return out


channels = st.fixed_dictionaries(
    {}, optional={"name": st.one_of(st.sampled_from(["woofer", "tweeter", "int", "2x", "a-b"]), values),
                  "stages": st.one_of(st.lists(st.one_of(stages(), values), max_size=3), values),
                  "stage": values})
tables = st.dictionaries(st.sampled_from(["target", "structure", "data", "coef", "acc_bits", "rounding",
                                          "overflow", "scaling", "passband_deviation_db", "limit_cycles",
                                          "passband", "stopband", "output_noise_dbfs", "bogus"]), values,
                         max_size=4)
documents = st.fixed_dictionaries(
    {},
    optional={"name": st.one_of(st.just("dut"), values), "sample_rate_hz": st.one_of(st.just(48000), values),
              "implementation": st.one_of(tables, values), "budget": st.one_of(tables, values),
              "channel": st.one_of(st.lists(st.one_of(channels, values), max_size=3), values),
              "sample_rate": values},
)


def load_and_design(raw: bytes) -> None:
    from coefc.design import design_channel

    d = parse_description(raw, "fuzz.toml")
    for ch in d.channels:
        design_channel(ch, d.sample_rate_hz, d.source)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(documents)
def test_any_toml_shaped_input_loads_or_raises_description_error(doc):
    try:
        load_and_design(toml_doc(doc))
    except DescriptionError:
        pass


@settings(max_examples=200, deadline=None)
@given(st.fixed_dictionaries({"name": st.just("dut"), "sample_rate_hz": st.sampled_from([8000, 48000, 96000]),
                              "channel": st.lists(st.fixed_dictionaries({"name": st.just("c"),
                                                                         "stages": st.lists(stages(), min_size=1,
                                                                                            max_size=2)}),
                                                  min_size=1, max_size=1)}))
def test_any_stage_designs_or_raises_description_error(doc):
    try:
        load_and_design(toml_doc(doc))
    except DescriptionError:
        pass


@settings(max_examples=150, deadline=None)
@given(st.binary(max_size=200))
def test_any_bytes_load_or_raise_description_error(raw):
    try:
        load_and_design(raw)
    except DescriptionError:
        pass


def test_channel_structure_and_budgets_by_data_word_width():
    from coefc.budget import apply_overrides, budget_for
    from coefc.program import Arithmetic
    from coefc.qformat import QFormat

    d = parse_description(b'name = "t"\nsample_rate_hz = 48000\n[budget]\noutput_noise_dbfs = -130\n'
                          b'passband_deviation_db = 0.05\n[budget.when_data_bits.16]\noutput_noise_dbfs = -90\n'
                          b'[[channel]]\nname = "a"\nstructure = "auto"\nstages = [{ kind = "gain", db = -1 }]\n'
                          b'[channel.budget]\npassband_deviation_db = 0.1\n'
                          b'[[channel]]\nname = "b"\nstages = [{ kind = "gain", db = -1 }]\n')
    a, b = d.channels
    assert (a.structure, b.structure) == ("auto", None)
    assert d.budget.when_data_bits == ((16, (("output_noise_dbfs", -90.0),)),)
    q15 = Arithmetic(data=QFormat(1, 15), coef=QFormat(2, 14), acc_bits=32)
    q31 = Arithmetic()
    f32 = Arithmetic(kind="float32", data=None, coef=None)
    # the width's table applies to a 16-bit word only; the channel's own keys still apply over it
    assert budget_for(d.budget, a, q15).output_noise_dbfs == -90
    assert budget_for(d.budget, a, q15).passband_deviation_db == 0.1
    assert budget_for(d.budget, b, q31).output_noise_dbfs == -130
    assert budget_for(d.budget, b, f32).output_noise_dbfs == -130
    # a command-line override wins over the table
    assert budget_for(apply_overrides(d.budget, output_noise_dbfs=-70), a, q15).output_noise_dbfs == -70
    with pytest.raises(DescriptionError, match="not a data-word width"):
        parse_description(b'name = "t"\nsample_rate_hz = 48000\n[budget.when_data_bits.1]\noutput_noise_dbfs = -9\n'
                          b'[[channel]]\nname = "a"\nstages = [{ kind = "gain", db = -1 }]\n')
