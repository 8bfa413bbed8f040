"""``structure = "auto"``: per section, the cheapest structure that meets the channel's budget.

Candidates are the structures the target runs (``[arithmetic] structures``; float32
only those marked ``float32``), ordered by cost: multiplies per sample of one section
(the target's own figure in ``[arithmetic] section_cost`` where it states one, else
:data:`coefc.program.STRUCTURE_TABLE`'s), then state words, then table order.  A
structure a target makes dear (double-word feedback on a chip whose low-word products
need a software multiply, say) is so chosen only for the sections that need it.  Every section starts at
the cheapest; while the channel misses its budget, sections move up one candidate:

1. every section whose realised poles are not strictly inside the unit circle;
2. else, when the passband deviation is over budget, the section (not yet at the
   last candidate) whose realised poles lie closest to the unit circle (the direct
   form's coefficient sensitivity grows as the poles approach it);
3. else, when the analytic output noise is over budget, the section with the
   largest noise contribution at the channel output.

The criteria are the ``stable``, ``passband_deviation_db`` and ``output_noise_dbfs``
checks of the channel's budget as the check applies it (:func:`coefc.budget.budget_for`:
the table of its data word's width, its ``[channel.budget]``, and the command line's
overrides over all; the caller passes it).  The per-section structures reach the
realiser as an argument (``realise(design, arithmetic, structures)``), never as
hidden state.  Limit cycles, the tones and the measured noise are not criteria
here: the check judges them on the result.  When a section would move past its last
candidate the search stops with one line naming the channel, the section and the
nearest miss (the best configuration seen).  Each section's choice and one short
reason are kept as ``precision`` notes of the program.

References
----------
L. B. Jackson, *Digital Filters and Signal Processing*, 3rd ed., 1996 (coefficient
sensitivity of the direct form near the unit circle; from memory).
"""

from __future__ import annotations

import math

import numpy as np


from ..program import STRUCTURE_TABLE, Arithmetic, ChannelProgram, Note, SectionOp


def candidates(target_structures, arithmetic: Arithmetic, costs=None) -> list[str]:
    """The target's structures, cheapest first (multiplies, state words, table order).

    *costs* maps a structure to the multiplies per sample one section costs on the
    target, where the target states it (``[arithmetic] section_cost``); the others
    cost the table's ``multiplies``.
    """
    order = list(STRUCTURE_TABLE)
    costs = costs or {}
    names = [s for s in target_structures if s in STRUCTURE_TABLE
             and (not arithmetic.is_float or STRUCTURE_TABLE[s].float32)]
    return sorted(names, key=lambda s: (costs.get(s, STRUCTURE_TABLE[s].multiplies), STRUCTURE_TABLE[s].state_words,
                                        order.index(s)))


def _evaluate(design, program: ChannelProgram, budget) -> tuple[list[float], float | None, float | None, list]:
    from ..analyse.linear import op_models
    from ..analyse.noise import analytic_noise
    from ..analyse.response import analyse_response

    ar = program.arithmetic
    secs = [op for op in program.ops if isinstance(op, SectionOp)]
    radii = []
    for op in secs:
        a1, a2 = op.a_phys(None if ar.is_float else ar.coef)
        radii.append(float(np.max(np.abs(np.roots([1.0, a1, a2])))) if (a1 or a2) else 0.0)
    dev = None
    if budget is not None and budget.passband_deviation_db is not None and max(radii, default=0.0) < 1.0:
        dev = analyse_response(design, program, passband=budget.passband).passband_deviation_db
    noise_db, contrib = None, [0.0] * len(secs)
    if not ar.is_float and max(radii, default=0.0) < 1.0:
        na = analytic_noise(program, op_models(program))
        if na is not None:
            noise_db = na.dbfs
            idx = [i for i, op in enumerate(program.ops) if isinstance(op, SectionOp)]
            for s in na.sources:
                if s.op_index in idx:
                    contrib[idx.index(s.op_index)] += s.output_variance_lsb2  # a section may have two
    return radii, dev, noise_db, contrib


def realise_auto(design, arithmetic: Arithmetic, target_structures, budget, realise,  # noqa: C901
                 costs=None) -> ChannelProgram:
    """The channel realised with a structure per section (see the module docstring).

    *costs*: the target's own cost of a structure (:func:`candidates`).
    """
    from . import RealisationError

    cands = candidates(target_structures, arithmetic, costs)
    cost = {s: (costs or {}).get(s, STRUCTURE_TABLE[s].multiplies) for s in cands}
    if not cands:
        raise RealisationError(f"channel '{design.name}': the target runs no structure that auto can choose")
    base = arithmetic.with_(structure=cands[0])
    n = sum(isinstance(op, SectionOp) for op in realise(design, base).ops)
    level = [0] * n
    why = ["cheapest"] * n
    best = None
    while True:
        prog = realise(design, base, tuple(cands[i] for i in level) or None)
        radii, dev, noise_db, contrib = _evaluate(design, prog, budget)
        dev_lim = getattr(budget, "passband_deviation_db", None)
        noise_lim = getattr(budget, "output_noise_dbfs", None)
        bad_stable = [i for i, r in enumerate(radii) if r >= 1.0]
        bad_dev = dev is not None and dev_lim is not None and dev > dev_lim
        bad_noise = noise_db is not None and noise_lim is not None and noise_db > noise_lim
        miss = (len(bad_stable), (dev or 0.0) - (dev_lim or 0.0) if bad_dev else 0.0,
                (noise_db or -math.inf) - noise_lim if bad_noise else 0.0)
        text = (f"section {bad_stable[0] + 1}: realised poles not inside the unit circle (radius "
                f"{radii[bad_stable[0]]:.6f})" if bad_stable else
                f"passband deviation {dev:.4g} dB over the {dev_lim:g} dB limit" if bad_dev else
                f"output noise {noise_db:.2f} dBFS over the {noise_lim:g} dBFS limit" if bad_noise else "")
        if best is None or miss < best[0]:
            best = (miss, text)
        if not (bad_stable or bad_dev or bad_noise):
            notes = tuple(prog.notes) + tuple(
                Note("choice", f"section {i + 1}: structure {cands[lv]} chosen by auto ({why[i]}; "
                     f"{cost[cands[lv]]} multiplies per sample)", section=i + 1)
                for i, lv in enumerate(level))
            return ChannelProgram(prog.name, prog.sample_rate_hz, arithmetic, prog.ops, notes)
        if bad_stable:
            move = bad_stable
            reason = "cheaper structures put its poles on or outside the unit circle"
        elif bad_dev:
            free = [i for i in range(n) if level[i] < len(cands) - 1]
            move = [max(free, key=lambda i: radii[i])] if free else []
            reason = "the passband deviation needs its poles placed more finely"
        else:
            free = [i for i in range(n) if level[i] < len(cands) - 1]
            move = [max(free, key=lambda i: contrib[i])] if free else []
            reason = "the output noise budget needs less noise from it"
        if not move or any(level[i] >= len(cands) - 1 for i in move):
            sec = (move[0] + 1) if move else (bad_stable[0] + 1 if bad_stable else n)
            raise RealisationError(f"channel '{design.name}', section {sec}: no structure of "
                                   f"{', '.join(cands)} meets the budget; nearest miss: {best[1]}")
        for i in move:
            level[i] += 1
            why[i] = reason
