"""The tables of stage kinds: one per design module, each kind with its keys, units and designer.

A stage kind (``kind = ...`` in a description) is declared once, in the table of
the design module (``coefc.design.<module>``) that designs it: which keys it
takes, the rule each key's value must follow and its unit, and the function
that designs it.  :mod:`coefc.spec` validates stages from these tables (unknown
keys, values, frequencies below Nyquist), :mod:`coefc.design` routes each stage
to its designer through them, and the kind tuples (``IIR_KINDS`` ...) are read
from them.  The tables sit in this leaf module rather than in the design
modules so that :mod:`coefc.spec` can read them without importing the design
layer (imports only go downward).

Adding a stage kind: one entry in its module's table here, the designer in that
module, its tests and the README's "Describing filters".
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Literal, Mapping

#: The rules a key's value can follow (:mod:`coefc.spec` holds one checker per rule).
Rule = Literal["frequency", "edge", "positive", "non_negative", "number", "integer", "positive_int",
               "boolean", "choice", "numbers", "sections", "band", "file"]

#: Largest IIR order and FIR length accepted (beyond them no fixed-point
#: realisation is sensible and the float design itself loses accuracy).
MAX_IIR_ORDER = 40
MAX_FIR_TAPS = 8191
MAX_LS_TAPS = 4095  # least squares solves an N x N system (8191 taps: 0.8 GB)


@dataclass(frozen=True)
class Key:
    """One key of a stage kind: the rule its value follows and its unit (``""``: a plain number or word).

    ``edge`` is a frequency for low/high-pass kinds and a band ``[low_hz, high_hz]``
    for band-pass/stop kinds; ``band`` is always a band ``[low_hz, high_hz]``;
    ``choice`` takes one of ``choices``; ``numbers`` a list of ``length`` = (fewest,
    most) numbers; ``file`` a path relative to the description file.
    """

    rule: Rule
    unit: str = ""
    choices: tuple[str, ...] = ()
    length: tuple[int, int] | None = None

    @property
    def is_frequency(self) -> bool:
        """The value is a frequency (or band) in Hz and must lie below Nyquist."""
        return self.unit == "Hz"


@dataclass(frozen=True)
class StageKind:
    """One stage kind: its design module, its designer and its keys.

    ``designer`` is a function of ``coefc.design.<module>`` taking a
    :class:`coefc.design.stage.StageContext`; ``None`` routes by the stage's
    ``response`` through :data:`IIR_RESPONSE_DESIGNERS`.
    """

    name: str
    module: str
    designer: str | None
    keys: Mapping[str, Key] = field(default_factory=dict)


def _kinds(module: str, designer: str | None, names, keys: Mapping[str, Key]) -> dict[str, StageKind]:
    keys = MappingProxyType(dict(keys))
    return {n: StageKind(n, module, designer, keys) for n in names}


_HZ = Key("frequency", "Hz")
_EDGE = Key("edge", "Hz")
_POS = Key("positive")
_DB = Key("positive", "dB")

# ------------------------------------------------------------------ coefc.design.iir (and the IIR families)

#: response -> (design module, designer) of the classic IIR kinds; a response not
#: named here is an analog prototype of coefc.design.iir
IIR_RESPONSE_DESIGNERS: Mapping[str, tuple[str, str]] = MappingProxyType({
    "butterworth": ("iir", "design_iir"),
    "chebyshev1": ("iir", "design_iir"),
    "chebyshev2": ("iir", "design_iir"),
    "elliptic": ("iir", "design_iir"),
    "bessel": ("iir", "design_iir"),
    "linkwitz-riley": ("linkwitz_riley", "design_linkwitz_riley"),
    "biquad": ("eq", "design_biquad_filter"),
})
IIR_RESPONSES = tuple(IIR_RESPONSE_DESIGNERS)

IIR = _kinds("iir", None, ("lowpass", "highpass", "bandpass", "bandstop"), {
    "response": Key("choice", choices=IIR_RESPONSES),
    "order": Key("positive_int"),
    "cutoff_hz": _EDGE,
    "passband_hz": _EDGE,
    "stopband_hz": _EDGE,
    "ripple_db": _DB,
    "attenuation_db": _DB,
    "margin_db": Key("non_negative", "dB"),
    "freq_hz": _HZ,
    "q": _POS,
    "bandwidth_oct": Key("positive", "octaves"),
})

# ------------------------------------------------------------------ coefc.design.fir

FIR_METHODS = ("kaiser", "equiripple", "least-squares", "halfband")

FIR = _kinds("fir", "design_fir", ("fir-lowpass", "fir-highpass", "fir-bandpass", "fir-bandstop"), {
    "method": Key("choice", choices=FIR_METHODS),
    "passband_hz": _EDGE,
    "stopband_hz": _EDGE,
    "attenuation_db": _DB,
    "ripple_db": _DB,
    "margin_db": Key("non_negative", "dB"),
    "taps": Key("positive_int", "taps"),
})

# ------------------------------------------------------------------ coefc.design.eq

_EQ_BASE = {"freq_hz": _HZ, "gain_db": Key("number", "dB"), "q": _POS}
EQ = {
    **_kinds("eq", "design_eq", ("peaking",), {**_EQ_BASE, "bandwidth_oct": Key("positive", "octaves")}),
    **_kinds("eq", "design_eq", ("lowshelf", "highshelf"), {**_EQ_BASE, "slope": _POS}),
    **_kinds("eq", "design_eq", ("notch", "allpass"),
             {"freq_hz": _HZ, "q": _POS, "bandwidth_oct": Key("positive", "octaves")}),
}

# ------------------------------------------------------------------ coefc.design.weighting

WEIGHTINGS = ("A", "C")

WEIGHTING = _kinds("weighting", "design_weighting", ("weighting",),
                   {"weighting": Key("choice", choices=WEIGHTINGS)})

# ------------------------------------------------------------------ coefc.design.basic

BASIC = {
    "dc-blocker": StageKind("dc-blocker", "basic", "design_dc_blocker", MappingProxyType({"cutoff_hz": _HZ})),
    "gain": StageKind("gain", "basic", "design_gain", MappingProxyType(
        {"db": Key("number", "dB"), "linear": _POS, "invert": Key("boolean")})),
    "delay": StageKind("delay", "basic", "design_delay", MappingProxyType(
        {"samples": Key("integer", "samples"), "ms": Key("non_negative", "ms"),
         "metres": Key("non_negative", "m"), "air_temperature_c": Key("number", "degC"),
         "interpolation": Key("choice", choices=("none", "thiran", "lagrange")),
         "max_error_samples": Key("positive", "samples"), "accuracy_hz": Key("frequency", "Hz")})),
    "sos": StageKind("sos", "basic", "design_sos", MappingProxyType({"sections": Key("sections")})),
    "transfer": StageKind("transfer", "basic", "design_transfer", MappingProxyType(
        {"b": Key("numbers", length=(1, MAX_FIR_TAPS)), "a": Key("numbers", length=(1, 2 * MAX_IIR_ORDER + 1))})),
    "fir": StageKind("fir", "basic", "design_fir_taps", MappingProxyType(
        {"taps": Key("numbers", length=(1, MAX_FIR_TAPS))})),
}

# ------------------------------------------------------------------ coefc.design.correction

#: Most sections one ``correction`` stage may fit.
MAX_CORRECTION_SECTIONS = 16
CORRECTION_PHASES = ("minimum", "linear")

_MEASURED = {
    "measurement": Key("file"),           # .csv (frequency_hz,magnitude_db[,phase_deg]) or mono .wav impulse response
    "range_hz": Key("band", "Hz"),         # where the corrected response should follow the target
    "target_db": Key("number", "dB"),      # flat target at this level (same unit as the measurement)
    "target": Key("file"),                 # target curve, a .csv like the measurement
    "smoothing_oct": Key("non_negative", "octaves"),  # fractional-octave smoothing window (0: none)
    "max_boost_db": Key("non_negative", "dB"),
}
CORRECTION = {
    **_kinds("correction", "design_correction", ("correction",), {
        **_MEASURED,
        "sections": Key("positive_int", "sections"),
        "max_cut_db": Key("positive", "dB"),
        "q_min": _POS,
        "q_max": _POS,
        "shelves": Key("boolean"),
    }),
    **_kinds("correction", "design_fir_correction", ("fir-correction",), {
        **_MEASURED,
        "taps": Key("positive_int", "taps"),
        "phase": Key("choice", choices=CORRECTION_PHASES),
        "regularisation_db": Key("number", "dB"),      # in-range regularisation (relative to the target's power)
        "transition_oct": Key("positive", "octaves"),  # how fast it rises outside range_hz
    }),
}
# ------------------------------------------------------------------ coefc.design.multirate

#: largest decimation or interpolation factor of one stage
MAX_RATE_FACTOR = 1024

#: most integrator/comb pairs of a CIC decimator, and its largest differential delay
MAX_CIC_STAGES = 8
MAX_CIC_DELAY = 4
#: largest register growth N*log2(R*D) of a CIC (bits): the register (data word + growth) must fit 64 bits
MAX_CIC_GROWTH = 56

MULTIRATE = {
    "decimate": StageKind("decimate", "multirate", "design_decimate", MappingProxyType(
        {"factor": Key("positive_int"), "allow_aliasing": Key("boolean")})),
    "interpolate": StageKind("interpolate", "multirate", "design_interpolate", MappingProxyType(
        {"factor": Key("positive_int"), "allow_imaging": Key("boolean")})),
    "cic-decimator": StageKind("cic-decimator", "multirate", "design_cic_decimator", MappingProxyType(
        {"factor": Key("positive_int"), "stages": Key("positive_int", "stages"),
         "differential_delay": Key("positive_int", "samples")})),
    "cic-compensator": StageKind("cic-compensator", "multirate", "design_cic_compensator", MappingProxyType(
        {"passband_hz": _HZ, "stopband_hz": _HZ, "attenuation_db": _DB, "ripple_db": _DB,
         "margin_db": Key("non_negative", "dB"), "taps": Key("positive_int", "taps")})),
}
#: the stage kinds that change the rate (each with an integer ``factor``)
RATE_KINDS = ("decimate", "interpolate", "cic-decimator")
#: the stage kinds that decimate
DECIMATING_KINDS = ("decimate", "cic-decimator")

# ------------------------------------------------------------------ all kinds

#: every stage kind, in the order messages list them
STAGE_KINDS_TABLE: Mapping[str, StageKind] = MappingProxyType({**IIR, **FIR, **EQ, **WEIGHTING, **BASIC,
                                                                  **CORRECTION, **MULTIRATE})

IIR_KINDS = tuple(IIR)
FIR_KINDS = tuple(FIR)
EQ_KINDS = tuple(EQ)

#: keys holding a frequency (or band) in Hz that must lie below Nyquist, over every kind (sorted)
FREQ_KEYS = tuple(sorted({k for sk in STAGE_KINDS_TABLE.values() for k, key in sk.keys.items() if key.is_frequency}))


def designer_of(kind: str, response: str | None = None) -> tuple[str, str]:
    """``(design module, designer function)`` of a stage of *kind* (and *response*, for IIR kinds)."""
    sk = STAGE_KINDS_TABLE[kind]
    if sk.designer is None:
        return IIR_RESPONSE_DESIGNERS.get(response, ("iir", "design_iir"))
    return sk.module, sk.designer
