"""The input guard in the circuit: codes outside the declared feature ranges clamped to them,
and/or flagged on ``out_of_range`` with the result they belong to (the guard itself is
resolved in :mod:`thresh2hdl.analysis.guard`)."""

from amaranth.hdl import Cat, Const, Mux, Signal, signed, unsigned

from ..analysis import value_bits
from ..names import GUARD_FLAG, clamped_name, flag_part_name, register_name

__all__ = ["guard_inputs", "guard_sample", "guarded_formats"]


def guarded_formats(config):
    """``(bits, signed)`` of each feature as the arithmetic sees it: its declared range's
    where the guard clamps codes outside it, else its port's format."""
    guard = config.guard
    formats = []
    for feature, (lo, hi), (code_lo, code_hi) in zip(config.model.features,
                                                     guard.feature_ranges, guard.code_ranges):
        clamped = guard.clamp and (lo > code_lo or hi < code_hi)
        formats.append(value_bits(lo, hi) if clamped else (feature.bits, feature.signed))
    return formats


def guard_inputs(m, stages, features, config):
    """The features as the arithmetic sees them (clamped to the declared ranges where the
    guard clamps) and the out-of-range flag put into ``stages`` as ``guard_flag`` (stage 0),
    when the design has one."""
    guard = config.guard
    if not (guard.clamp or guard.flag):
        return list(features)
    guarded, outside = [], {}
    for index, (port, feature) in enumerate(zip(features, config.model.features)):
        (lo, hi), (code_lo, code_hi) = guard.feature_ranges[index], guard.code_ranges[index]
        below = above = None
        if lo > code_lo:
            below = Signal(name=f"{feature.name}_below")
            m.d.comb += below.eq(port < lo)
        if hi < code_hi:
            above = Signal(name=f"{feature.name}_above")
            m.d.comb += above.eq(port > hi)
        outside[index] = [test for test in (below, above) if test is not None]
        if not guard.clamp or (below is None and above is None):
            guarded.append(port)
            continue
        bits, is_signed = value_bits(lo, hi)
        value = Signal(signed(bits) if is_signed else unsigned(bits),
                       name=clamped_name(feature.name))
        clamped = port
        if above is not None:
            clamped = Mux(above, hi, clamped)
        if below is not None:
            clamped = Mux(below, lo, clamped)
        m.d.comb += value.eq(clamped)
        guarded.append(value)
    if config.range_flag:
        _flag_tree(m, stages, guard, outside)
    return guarded


def _flag_tree(m, stages, guard, outside):
    """The out-of-range flag, an OR tree laid out by ``guard.flag_layers``, layer ``j`` in
    the stage of level ``j``: a wide OR over many ports is no longer one stage's path."""
    layers = guard.flag_layers
    below = []
    for j, layer in enumerate(layers):
        made = []
        for k, group in enumerate(layer):
            name = flag_part_name(j, k, j == len(layers) - 1)
            if j == 0:
                inputs = [test for index in group for test in outside[index]]
            else:
                inputs = [stages.at(below[c], stages.stage_of(j)) for c in group]
            part = Signal(name=name)
            m.d.comb += part.eq(Cat(*inputs).any() if inputs else 0)
            stages.put(name, part, 0 if j == 0 else stages.stage_of(j))
            made.append(name)
        below = made



def guard_sample(m, component, beat, first, last, finish, transfer):
    """The sample as the arithmetic sees it (clamped to this beat's feature's declared
    range where the guard clamps) and the flag of the result: set when any beat of the
    input was outside its range, registered with the result."""
    guard, count = component.config.guard, component.beats
    if not guard.needed:
        if component.config.range_flag:
            m.d.comb += component.out_of_range.eq(0)
        return component.x

    def by_beat(values):
        chosen = Const(values[-1], component.x.shape())
        for k in range(count - 2, -1, -1):
            chosen = Mux(beat == k, values[k], chosen)
        return chosen

    los = [lo for lo, _ in guard.feature_ranges]
    his = [hi for _, hi in guard.feature_ranges]
    lo_now, hi_now = Signal(component.x.shape(), name="range_lo"), \
        Signal(component.x.shape(), name="range_hi")
    m.d.comb += [lo_now.eq(by_beat(los)), hi_now.eq(by_beat(his))]
    below, above = Signal(name="below_range"), Signal(name="above_range")
    # A bound that no feature tightens is the port's own: its comparison could never hold
    # (and a comparison that cannot change is a lint warning).
    shape = component.x.shape()
    port_lo = -(1 << (shape.width - 1)) if shape.signed else 0
    port_hi = (1 << (shape.width - 1)) - 1 if shape.signed else (1 << shape.width) - 1
    m.d.comb += [below.eq(component.x < lo_now if any(lo > port_lo for lo in los) else 0),
                 above.eq(component.x > hi_now if any(hi < port_hi for hi in his) else 0)]
    sample = component.x
    if guard.clamp:
        sample = Signal(component.x.shape(), name="sample_clamped")
        m.d.comb += sample.eq(Mux(below, lo_now, Mux(above, hi_now, component.x)))
    if component.config.range_flag:
        seen = Signal(name="outside_seen") if count > 1 else None
        now = Signal(name="outside_now")
        if count > 1:
            m.d.comb += now.eq(below | above | (seen & ~first))
            with m.If(transfer & ~last):
                m.d.sync += seen.eq(now)
        else:
            m.d.comb += now.eq(below | above)
        flag = Signal(name=register_name(GUARD_FLAG, 1), reset_less=True)
        with m.If(finish):
            m.d.sync += flag.eq(now)
        m.d.comb += component.out_of_range.eq(flag)
    return sample

