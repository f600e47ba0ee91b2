"""On-chip learning: the perceptron rule on the loadable weights' registers, in the fabric.

A labelled sample is an input like any other, marked by ``learn_enable`` with its target
bit(s) on ``learn_target``; it is classified with the registers as they are when it enters.
Its marks and each feature's step ``eta x`` (a shift) ride the pipeline beside it, and in the
cycle its result leaves (``out_valid & out_ready``) every unit whose own decision
(``score > 0``) differs from its target bit moves its weights by the steps and its bias by
``bias_step``, towards the target, each sum clamped to the register's declared range. A write
through the weight port in the same cycle wins. ``learn_read_address`` / ``learn_read_data``
read any register back (past the last, 0), combinationally. In the form built for speed
(``dsp_products``) the update and the port act on copies of the registers that the datapath's
follow a cycle later (``UnitConfig.learning_lag``), each copy holding its sum before the
clamp so that the loop is one LUT, a carry chain and the copy's flip-flop in the adder's own
cells (the bias's adder starts above the bias step's low zero bits, which no carry crosses);
a write is held a clock and enters through the same adder
(``UnitConfig.learning_write_latency``); the bias is carried less one, so that the decision
is the sign of a sum of its own (:func:`~.trees.sum_is_positive`); the read-back reads the
registers the datapath reads, in two registered steps: every path is local. The host-side
model of all this is :mod:`thresh2hdl.train.on_chip`; the cycle-exact one,
:mod:`thresh2hdl.verify.learning`.
"""

from amaranth.hdl import Cat, Mux, Shape, Signal, signed
from amaranth.lib.wiring import In, Out

from ..names import (GUARD_FLAG, HELD_WRITE_DATA, LEARN_ENABLE, LEARN_READ_HIGH, LEARN_TARGET,
                     READ_GROUP, entered_name, held_data_name, learn_read_group_name,
                     learn_mistake_name, learn_move_name, learn_step_name, written_name)
from .input_guard import guarded_formats
from .register_bus import index_known, selected

__all__ = ["learning_members", "copy_bits", "update_widths", "move_stage", "build_learning",
           "entry_bias",
           "LEARN_PREFIX", "LEARN_INPUTS", "LEARN_OUTPUTS"]

LEARN_PREFIX = "learn_"
LEARN_INPUTS = ("enable", "target", "read_address")
LEARN_OUTPUTS = ("read_data",)


def learning_members(config, addresses):
    """The learning ports' signature members (none without on-chip learning)."""
    if not config.on_chip_learning:
        return {}
    return {LEARN_PREFIX + "enable": In(1),
            LEARN_PREFIX + "target": In(len(config.model.units)),
            LEARN_PREFIX + "read_address": In(range(addresses)),
            LEARN_PREFIX + "read_data": Out(signed(max(config.weight_bits, config.bias_bits)))}


def entry_bias(m, stages, config, bias):
    """The bias as the tree should add it: with on-chip learning, the register as the vector
    entered (carried beside it, as the products take the weights when it enters), so that
    every vector meets one set of registers, and in the form built for speed carried less
    one (``build_tree``'s ``bias_less_one``); else the register itself."""
    if not config.on_chip_learning:
        return bias
    name = entered_name(bias.name)
    if config.learning_lag:
        # Carried less one: the score adds it back as its adder's carry in, and the
        # decision (score > 0) is the sign of a sum of its own of the same two registers.
        less = Signal(signed(len(bias) + 1), name=name)
        m.d.comb += less.eq(bias - 1)
        bias = less
    stages.put(name, bias, 0)
    return name


def _port(component, name):
    return getattr(component, LEARN_PREFIX + name)


def _saturated(m, register, step, sign_up, name):
    """``register + step`` (``sign_up``) or ``register - step``, clamped to the register's
    range: the step negated or not (a narrow adder), one adder a bit wider than both, and the
    two limits."""
    width = max(len(register), len(step) + (not step.shape().signed)) + 1
    delta = Signal(signed(len(step) + 1), name=f"{name}_delta")
    m.d.comb += delta.eq(Mux(sign_up, step, -step))
    total = Signal(signed(width), name=f"{name}_next")
    m.d.comb += total.eq(register + delta)
    lo, hi = -(1 << (len(register) - 1)), (1 << (len(register) - 1)) - 1
    return Mux(total > hi, hi, Mux(total < lo, lo, total))


def copy_bits(config):
    """The widths of the update's copies in address order (``learning_lag``; else None): each
    holds its register plus a move before the clamp, so one bit over the wider of the two."""
    if not config.learning_lag:
        return None
    rule = config.learning_rule
    move_bits = [bits + 1 for bits, _ in _steps(config)]
    bias_move_bits = rule.bias_step.bit_length() + 1
    bits = []
    for _ in config.model.units:
        bits += [max(config.weight_bits, b) + 1 for b in move_bits]
        bits.append(max(config.bias_bits, bias_move_bits) + 1)
    return bits


def update_widths(config):
    """``(step bits, weight bits, bias bits)`` as built: the widest carried step (a move,
    signed towards the target, in the form built for speed), the widest weight's update
    adder and the bias's (the report states them)."""
    rule = config.learning_rule
    steps = _steps(config)
    widest = max(bits for bits, _ in steps)
    if config.learning_lag:
        copies = copy_bits(config)
        return widest + 1, max(copies[:-1]), copies[-1] - _zero_bits(rule.bias_step)
    return (widest,
            max(max(config.weight_bits, bits + (not signed)) + 1 for bits, signed in steps),
            max(config.bias_bits, rule.bias_step.bit_length() + 1) + 1)


def _steps(config):
    """Each feature's step ``(bits, signed)``: :func:`_step_shape` of what the arithmetic
    sees (the guard resolved once)."""
    shift = config.learning_rule.shift
    return [(max(1, bits + shift), signed) for bits, signed in guarded_formats(config)]


def move_stage(config, latency):
    """Where the form built for speed signs each step towards the target (its
    ``learn_move{i}``): a stage after entry where two or more stages follow, else where the
    sample enters; None in the other forms (the step is carried unsigned)."""
    if config.dsp_products is None:
        return None
    return 1 if latency >= 2 else 0


def build_learning(m, component, stages, store, features, decisions):
    """The update path and the read port. ``features``: the codes the arithmetic sees (after
    the input guard); ``decisions``: per unit, the stage name of its own decision bit (made
    where its score is; carried here to the last stage). The write port is connected after
    the updates, so that a write in the same cycle wins."""
    config = component.config
    rule = config.learning_rule
    latency = component.latency
    stages.put(LEARN_ENABLE, _port(component, "enable"), 0)
    stages.put(LEARN_TARGET, _port(component, "target"), 0)
    steps = []
    for index, feature in enumerate(features):
        step = Signal(_step_shape(feature, rule.shift), name=learn_step_name(index))
        m.d.comb += step.eq(feature << rule.shift if rule.shift >= 0 else
                            feature >> -rule.shift)
        signed_at = move_stage(config, latency)
        if signed_at == 0:
            # Signed towards the target where the sample enters, so that the update adds it.
            step = _move(m, step, _port(component, "target")[0], learn_move_name(index))
        # A left shift's zero bits are left out of the registers, as a shifted input's are
        # (constant flops would be dropped, and the registers' names with them).
        stages.put(step.name, step, 0, max(rule.shift, 0))
        if signed_at == 1:
            # Signed a stage later, from the step's and the target's registers: the negation
            # then starts at nearby flip-flops, not at the port.
            step = _move(m, stages.at(step.name, 1), stages.at(LEARN_TARGET, 1)[0],
                         learn_move_name(index))
            stages.put(step.name, step, 1, max(rule.shift, 0))
        steps.append(stages.at(step.name, latency))
    if config.dsp_products is None:
        _update(m, component, stages, store, steps, decisions)
    else:
        _update_fast(m, component, stages, store, steps, decisions)
    if not config.learning_lag:
        store.connect_port(m, component)
    _read_port(m, component, store.read, config.learning_read_latency)


def _update(m, component, stages, store, steps, decisions):
    """Each unit's registers moved by the steps when the leaving sample finds it wrong."""
    config, latency = component.config, component.latency
    rule = config.learning_rule
    fire = Signal(name="learn_fire")
    enabled = stages.at(LEARN_ENABLE, latency)
    if config.range_flag:
        # A sample with a code outside the declared ranges teaches nothing.
        enabled = enabled & ~stages.at(GUARD_FLAG, latency)
    m.d.comb += fire.eq(component.out_valid & component.out_ready & enabled)
    targets = stages.at(LEARN_TARGET, latency)
    bias_step = Signal(range(rule.bias_step + 1), name="learn_bias_step", init=rule.bias_step)
    m.d.comb += bias_step.eq(rule.bias_step)
    for unit, (row, bias) in enumerate(zip(store.owned_weights, store.owned_biases)):
        target = targets[unit]
        wrong = Signal(name=f"learn_wrong{unit}")
        m.d.comb += wrong.eq(stages.at(decisions[unit], latency) != target)
        with m.If(fire & wrong):
            for register, step in zip(row, steps):
                m.d.sync += register.eq(_saturated(m, register, step, target, register.name))
            m.d.sync += bias.eq(_saturated(m, bias, bias_step, target, bias.name))


def _update_fast(m, component, stages, store, moves, decisions):
    """As :func:`_update`, built for speed (``dsp_products``): the moves already signed, the
    mistake carried from the decision's stage, and each copy loading, under one enable, its
    value clamped plus the move, or (a write held a clock, which wins) 0 plus the data: the
    adder's sum then feeds the copy's flip-flop directly, and they share logic cells."""
    config, latency = component.config, component.latency
    rule = config.learning_rule
    targets = stages.at(LEARN_TARGET, latency)
    bias_step = Signal(range(rule.bias_step + 1), name="learn_bias_step", init=rule.bias_step)
    m.d.comb += bias_step.eq(rule.bias_step)
    write_data = Signal.like(component.weight_data, name=HELD_WRITE_DATA)
    m.d.sync += write_data.eq(component.weight_data)
    for unit, (row, bias) in enumerate(zip(store.owned_weights, store.owned_biases)):
        start = unit * (len(row) + 1)
        wrong = stages.at(_mistake(m, stages, config, decisions[unit], unit), latency)
        bias_move = _move(m, bias_step, targets[unit], "learn_bias_move")
        values = store.values[start:start + len(row) + 1]
        taught = component.out_valid & component.out_ready & wrong
        for offset, (copy, value, move) in enumerate(zip(row + [bias], values,
                                                         moves + [bias_move])):
            written = Signal(name=written_name(copy.name))
            m.d.sync += written.eq(store.written(component, start + offset))
            held = write_data
            if copy is bias:
                # The bias's adder is the longest: its own held data, placed beside it.
                held = Signal.like(component.weight_data, name=held_data_name(copy.name))
                m.d.sync += held.eq(component.weight_data)
            data = held[:len(value)].as_signed()
            kept = Mux(written, 0, value)
            added = Mux(written, data, move)
            low = _zero_bits(rule.bias_step) if copy is bias else 0
            if low:
                # The move's low bits are zeros, and a write adds to 0: no carry crosses bit
                # ``low``, so those bits take the value or the data, and the adder starts there.
                added = Cat(Mux(written, data[:low], value[:low]),
                            (kept >> low) + (added >> low)).as_signed()
            else:
                added = kept + added
            with m.If(taught | written):
                m.d.sync += copy.eq(added)


def _zero_bits(number):
    """How many low bits of ``number`` (nonzero) are zeros."""
    return (number & -number).bit_length() - 1


def _move(m, step, up, name):
    """``step`` or ``-step`` (``up``): a signal one bit wider than the step needs."""
    move = Signal(signed(len(step) + 1), name=name)
    m.d.comb += move.eq(Mux(up, step, -step))
    return move


def _mistake(m, stages, config, decision, unit):
    """Whether a labelled sample (not flagged out of range) finds unit ``unit``'s decision
    differing from its target bit, made in the decision's own stage and carried from there:
    the update then starts at one flip-flop, not at the comparison."""
    made = stages.produced[decision][0]
    mistake = Signal(name=learn_mistake_name(unit))
    taught = stages.at(LEARN_ENABLE, made)
    if config.range_flag:
        taught = taught & ~stages.at(GUARD_FLAG, made)
    m.d.comb += mistake.eq(taught & (stages.at(decision, made) != stages.at(LEARN_TARGET,
                                                                            made)[unit]))
    stages.put(mistake.name, mistake, made)
    return mistake.name


def _step_shape(feature, shift):
    """``x << shift`` / ``x >> -shift`` of ``feature``'s shape: its width moved by the shift."""
    shape = feature.shape()
    return Shape(max(1, shape.width + shift), shape.signed)


def _read_port(m, component, registers, latency):
    """The addressed register (0 past the last) on ``read_data``: within the cycle, or
    (``latency`` 2) in two registered steps, so that no path crosses the part: each group of
    :data:`READ_GROUP` registers chooses one by the address's low bits into a register of
    its own (placed by its registers), then the group's register is chosen by the high bits
    as they were a cycle before."""
    address = _port(component, "read_address")
    data = _port(component, "read_data")
    if not latency:
        m.d.comb += data.eq(Mux(index_known(address, len(registers)),
                                selected(registers, address), 0))
        return
    assert latency == 2, latency
    low_bits = (READ_GROUP - 1).bit_length()
    low, high = address[:low_bits], address[low_bits:]
    chosen = []
    for index in range(0, len(registers), READ_GROUP):
        group = registers[index:index + READ_GROUP]
        register = Signal(signed(max(len(r) for r in group)),
                          name=learn_read_group_name(len(chosen)))
        m.d.sync += register.eq(Mux(index_known(low, len(group)), selected(group, low), 0))
        chosen.append(register)
    read = Signal(data.shape(), name="learn_read_r")
    if len(chosen) == 1:
        m.d.sync += read.eq(chosen[0])
    else:
        was = Signal(len(high), name=LEARN_READ_HIGH)
        m.d.sync += was.eq(high)
        m.d.sync += read.eq(Mux(index_known(was, len(chosen)), selected(chosen, was), 0))
    m.d.comb += data.eq(read)
