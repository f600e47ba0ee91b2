"""The Amaranth components as a library: a user's own ``wiring.Component`` instantiates a
threshold unit or a bank as a submodule, and its decisions are the plain integer sum's."""

import random
import re
import subprocess
import sys
from pathlib import Path

from amaranth import Module
from amaranth.hdl import signed
from amaranth.lib import wiring
from amaranth.lib.wiring import In, Out
from amaranth.sim import Simulator

from thresh2hdl import FeatureFormat, Model, Unit, UnitConfig
from thresh2hdl.hardware import make_component, plan_design

README = (Path(__file__).parents[2] / "README.md").read_text(encoding="utf-8")


def unit_model(weights=(3, -2, 1), bias=-40):
    """Synthetic: three 8-bit unsigned codes."""
    return Model(module="alarm", features=[FeatureFormat(n, 8) for n in "abc"],
                 units=[Unit("fire", weights, bias)])


def bank_model():
    """Synthetic: three classes over three 6-bit signed codes."""
    return Model(module="sorter", features=[FeatureFormat(n, 6, signed=True) for n in "abc"],
                 units=[Unit("low", (-3, 1, 2), 5), Unit("mid", (1, 1, 1), 0),
                        Unit("high", (4, -1, -2), -7)])


class Sampler(wiring.Component):
    """A user's design: a sample of three codes with a strobe in, the instantiated design's
    decision and score out with a strobe, a register after it (the user's own logic)."""

    def __init__(self, model, **options):
        bits = model.features[0].bits
        shape = bits if not model.features[0].signed else signed(bits)
        super().__init__({"a": In(shape), "b": In(shape), "c": In(shape), "strobe": In(1),
                          "decision": Out(2), "score": Out(signed(16)), "done": Out(1)})
        self.model, self.options = model, options

    def elaborate(self, platform):
        m = Module()
        m.submodules.unit = unit = make_component(UnitConfig(self.model, **self.options))
        m.d.comb += [port.eq(value) for port, value in
                     zip(unit.feature_ports, (self.a, self.b, self.c))]
        m.d.comb += [unit.in_valid.eq(self.strobe), unit.out_ready.eq(1)]
        m.d.sync += [self.done.eq(unit.out_valid), self.decision.eq(unit.y),
                     self.score.eq(unit.score_ports[-1])]
        return m


def plain_scores(model, codes):
    # Outside reference: the definition itself, y = (w . x + b > 0), in plain Python
    # (a bank: the index of the largest w . x + b, a tie to the lower index, as README states).
    return [sum(w * x for w, x in zip(unit.weights, codes)) + unit.bias for unit in model.units]


def plain_decision(model, codes):
    scores = plain_scores(model, codes)
    if len(scores) == 1:
        return int(scores[0] > 0)
    return scores.index(max(scores))


def run_user_design(model, design_model=None, *, vectors=150, seed=0, **options):
    """The decisions and last scores the user's design gives for random codes, one sample
    every cycle (the unit never stalls: out_ready is held high)."""
    dut = Sampler(design_model or model, **options)
    rng = random.Random(seed)
    feature = model.features[0]
    codes = [[rng.randint(*feature.code_range) for _ in range(3)] for _ in range(vectors)]
    seen, first_done = [], []

    async def testbench(ctx):
        for tick, row in enumerate(codes + [None] * 8, start=1):
            ctx.set(dut.strobe, row is not None)
            for port, code in zip((dut.a, dut.b, dut.c), row or (0, 0, 0)):
                ctx.set(port, code)
            await ctx.tick()
            if ctx.get(dut.done):
                seen.append((ctx.get(dut.decision), ctx.get(dut.score)))
                first_done.append(tick)

    sim = Simulator(dut)
    sim.add_clock(1e-8)
    sim.add_testbench(testbench)
    sim.run()
    return codes, seen, first_done[0]


def test_a_unit_inside_a_user_design_decides_as_the_plain_sum():
    model = unit_model()
    for pipeline in (0, 2):
        codes, seen, first_done = run_user_design(model, pipeline=pipeline)
        # The first result: `latency` edges after its sample, then one for the user's register.
        assert first_done == plan_design(UnitConfig(model, pipeline=pipeline)).latency + 1
        assert [s for s, _ in seen] == [plain_decision(model, c) for c in codes]
        assert [s for _, s in seen] == [plain_scores(model, c)[0] for c in codes]


def test_a_bank_inside_a_user_design_picks_the_plain_argmax():
    model = bank_model()
    codes, seen, _ = run_user_design(model, pipeline=3)
    assert [s for s, _ in seen] == [plain_decision(model, c) for c in codes]
    assert [s for _, s in seen] == [plain_scores(model, c)[-1] for c in codes]


def test_the_ports_are_the_ones_the_readme_names():
    # The plan answers for the component without building one (none is left unused).
    unit = plan_design(UnitConfig(unit_model(), pipeline=2))
    assert list(unit.signature.members) == ["in_valid", "in_ready", "x0", "x1", "x2",
                                            "out_valid", "out_ready", "y", "score"]
    assert unit.latency == 2
    bank = plan_design(UnitConfig(bank_model(), pipeline=3))
    assert [name for name in bank.signature.members if name.startswith("score")] == \
        ["score0", "score1", "score2"]


def test_the_check_fails_for_a_design_of_another_model():
    # The comparison can fail: the design of a model whose bias differs by one.
    model = unit_model()
    codes, seen, _ = run_user_design(model, unit_model(bias=-39), vectors=300, pipeline=1)
    assert [s for _, s in seen] != [plain_scores(model, c)[0] for c in codes]


def test_the_readme_amaranth_example_runs():
    blocks = [b for b in re.findall(r"```python\n(.*?)```", README, re.S)
              if "wiring.Component" in b]
    assert len(blocks) == 1
    result = subprocess.run([sys.executable, "-c", blocks[0]], capture_output=True, text=True,
                            timeout=300)
    assert result.returncode == 0, result.stderr[-2000:]
    # 3*50 - 2*10 + 0 - 40 = 90 > 0, then 3*5 - 2*10 + 0 - 40 = -45 (plain arithmetic).
    assert result.stdout.split() == ["alarm", "1", "alarm", "0"]
