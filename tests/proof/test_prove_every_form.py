"""The proof's reach: every combination of options that `build` accepts either proves, or
`prove` answers undecided with a reason that the README lists.

The options are those of the forms `build` makes (architecture, pipeline depth, split adders
with their carry registers, loadable weights with the plain or AXI4-Lite port, on-chip
learning, loadable products as rows, declared widths over the fewest, the input guard, banks
with and without shared terms, the AXI4-Stream interface, the clock enable, each reset kind,
Verilog or VHDL: a VHDL design is proved as GHDL 2.0's synthesis reads it back). All their
combinations are tens of thousands; the tests prove a set of the accepted ones that holds every
pair of option values `build` accepts together (a pairwise cover: common practice in
combinatorial testing, since most faults need one or two options to show), on the demo model
and on random ones. The solver is Boolector 3.2.3, the export Yosys 0.70's.
"""

import functools
import itertools
import re
from pathlib import Path

import numpy as np
import pytest

from helpers import bank_model, make_model, prove_design, require_tool
from thresh2hdl.app import demo_model
from thresh2hdl.errors import InputError
from thresh2hdl.hardware import RESET_KINDS, UnitConfig

DIMENSIONS = {
    "model": ("demo", "unit", "bank"),
    "arch": ("tree", "shiftadd", "serial"),
    "pipeline": (0, 1, 2, "full"),
    "split": (None, (4, 1), (3, 2)),          # (split bits, carry registers)
    "weights": ("constant", "plain", "axi4-lite", "learning"),
    "widths": ("default", "wide"),            # wide: declared widths over the fewest
    "guard": ("default", "clamp", "flag", "both"),
    "share_terms": (False, True),
    "interface": ("plain", "axi-stream"),
    "clock_enable": (False, True),
    "reset": tuple(RESET_KINDS),
    "hdl": ("verilog", "vhdl"),               # vhdl: GHDL's synthesis reading is proved
    "dsp_products": (None, 1),                # loadable products past the first as rows
}
SHARDS = 6


@functools.cache
def model_named(name):
    """The demo (ten 12-bit features, one range tighter than its port), a random unit of signed
    features with tightened ranges, and a random bank of three units."""
    if name == "demo":
        return demo_model()
    rng = np.random.default_rng(29)
    if name == "unit":
        ranges = [(int(lo), int(lo) + 60) for lo in rng.integers(-64, 4, 5)]
        return make_model([int(w) for w in rng.integers(-90, 91, 5)], int(rng.integers(-900, 900)),
                          bits=7, signed=True, ranges=ranges)
    weights = rng.integers(-12, 13, (3, 4))
    weights[:, 0] = [6, 6, -6]          # a term the units share
    return bank_model(weights.tolist(), [int(b) for b in rng.integers(-40, 40, 3)], bits=5)


def options_of(choice):
    """The UnitConfig keywords of one combination (a dict of DIMENSIONS' values)."""
    split = choice["split"] or (None, 1)
    guard = {"default": (None, None), "clamp": (True, False), "flag": (False, True),
             "both": (True, True)}[choice["guard"]]
    weights = choice["weights"]
    wide = {} if choice["widths"] == "default" else \
        dict(score_bits=40, **({} if weights == "constant" else dict(weight_bits=12, bias_bits=28)))
    learning = dict(on_chip_learning=True, learning_rate="1/4") if weights == "learning" else {}
    return dict(arch=choice["arch"], pipeline=choice["pipeline"], split_bits=split[0],
                carry_registers=split[1], loadable_weights=weights != "constant",
                weight_port="axi4-lite" if weights == "axi4-lite" else "plain",
                clamp=guard[0], range_flag=guard[1], share_terms=choice["share_terms"],
                interface=choice["interface"], clock_enable=choice["clock_enable"],
                reset=choice["reset"], dsp_products=choice["dsp_products"], **wide, **learning)


def accepted(choice):
    try:
        UnitConfig(model_named(choice["model"]), **options_of(choice))
    except InputError:
        return False
    return True


@functools.cache
def pairwise_cover():
    """Accepted combinations holding every pair of values that some accepted combination
    holds, chosen greedily (the combination with the most pairs not yet held, the first in
    order on ties): deterministic."""
    names = list(DIMENSIONS)
    combos = [dict(zip(names, values)) for values in itertools.product(*DIMENSIONS.values())]
    combos = [c for c in combos if accepted(c)]
    index = {}
    rows = np.array([[index.setdefault(((a, c[a]), (b, c[b])), len(index))
                      for a, b in itertools.combinations(names, 2)] for c in combos])
    open_pairs = np.ones(len(index), bool)
    chosen = []
    while open_pairs.any():
        best = int(open_pairs[rows].sum(axis=1).argmax())
        chosen.append(combos[best])
        open_pairs[rows[best]] = False
    return chosen, rows.shape[0], len(index)


def listed_refusals():
    """The reasons the README lists for forms `prove` does not cover (its bullet list under
    "Forms the proof does not cover")."""
    text = (Path(__file__).parents[2] / "README.md").read_text()
    section = text.split("Forms the proof does not cover", 1)[1].split("\n\n", 2)[1]
    return [line[2:].split(":")[0].strip() for line in section.splitlines()
            if line.startswith("- ")]


def vhdl_reading(model, options):
    """The design's VHDL as GHDL's synthesis reads it back (GHDL 2.0), in Verilog."""
    from thresh2hdl.emit import emit_vhdl
    from thresh2hdl.hardware import make_component
    from thresh2hdl.verify import ghdl_reading
    require_tool("ghdl")
    return ghdl_reading(emit_vhdl(make_component(UnitConfig(model, **options)), model),
                        model.module)


@pytest.mark.slow       # (tens of thousands of configurations checked: seconds)
def test_the_cover_holds_every_accepted_pair():
    chosen, accepted_count, pairs = pairwise_cover()
    assert all(accepted(c) for c in chosen) and len(chosen) < accepted_count / 100
    held = {((a, c[a]), (b, c[b])) for c in chosen
            for a, b in itertools.combinations(DIMENSIONS, 2)}
    assert len(held) == pairs
    # Every value of every option is proved somewhere (serial with a clock enable, say).
    for name, values in DIMENSIONS.items():
        assert {c[name] for c in chosen} == set(values), name


@pytest.mark.prove
@pytest.mark.parametrize("shard", range(SHARDS))
def test_every_accepted_combination_proves_or_is_refused_with_a_listed_reason(shard):
    chosen, _, _ = pairwise_cover()
    refusals = listed_refusals()
    failures = []
    for choice in chosen[shard::SHARDS]:
        model, options = model_named(choice["model"]), options_of(choice)
        outcome = prove_design(model, text=vhdl_reading(model, options)
                               if choice["hdl"] == "vhdl" else None, **options)
        if outcome.status == "proved":
            continue
        listed = outcome.status == "undecided" and any(
            re.search(re.escape(reason), outcome.detail) for reason in refusals)
        if not listed:
            failures.append(f"{choice}: {outcome.status}: {outcome.detail[:300]}")
    assert not failures, "\n".join(failures)
