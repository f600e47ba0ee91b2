"""On-chip learning in the vectors: labelled inputs among the others, the registers read back
every cycle, and what the hardware must answer, cycle by cycle.

:func:`with_learning` marks about half of a stimulus's vectors as labelled samples with
random target bits (a random target is wrong about half the time, so the registers move, and
reach their limits, often), drives a random read-back address every cycle, and replaces the
expectations by those of :func:`learning_trace`: the cycle-exact model of
:mod:`thresh2hdl.hardware.learning`, built on the rule of :mod:`thresh2hdl.train.on_chip`.
Every simulator then checks each result against the weights its vector met and every
register, every cycle, against the model's.
"""

from dataclasses import replace

import numpy as np

from ..hardware.weights import register_file
from .register_bus import register_value
from .side import LEARNING, SideRun
from .stimulus import write_columns

__all__ = ["with_learning", "learning_trace", "LABELLED_SHARE", "WRITE_SHARE"]

LABELLED_SHARE = 0.5
WRITE_SHARE = 0.1


def learning_trace(stimulus, config, labelled, targets, addresses):
    """Replay ``stimulus``'s cycles through the registers: returns ``(scores, decisions,
    read_data, final)``: each vector's scores with the registers as they were when it
    entered, its decision, each cycle's read-back (the port's bits, unsigned), and the
    registers after the last cycle (weights per unit, biases).

    In a cycle, the read-back and an entering vector see the registers as they are; then the
    vector leaving (``out_valid & out_ready``), if labelled and not flagged out of range,
    updates every unit whose own decision (score > 0) differs from its target bit; then a
    write through the port lands, winning over the update. With ``config.learning_lag`` (the
    form built for speed) the update and the write land in the update's copies, and an
    entering vector and the read-back see them as they were a cycle before; a write lands
    ``config.learning_write_latency`` cycles after the port carries it (winning over the
    update of the cycle it lands in); the read-back then comes
    ``config.learning_read_latency`` cycles after its address (0 before)."""
    rule, model = config.learning_rule, config.model
    guard = config.guard
    vectors = np.asarray(stimulus.vectors, dtype=np.int64)
    codes = replace(guard, clamp=True).apply(vectors) if guard.needed else vectors
    flagged = guard.outside(vectors) if guard.flag else np.zeros(len(vectors), dtype=bool)
    units, features = len(model.units), len(model.features)
    widths, values = register_file(config)
    # int64 is exact while no score can pass 2^62; past that, Python integers.
    widest = max(max(abs(lo), abs(hi)) for lo, hi in config.guard.feature_ranges) \
        if features else 0
    exact = features * (1 << (config.weight_bits - 1)) * widest + \
        (1 << (config.bias_bits - 1)) < 1 << 62
    kind = np.int64 if exact else object
    w = np.array(values, dtype=object).reshape(units, features + 1)
    weights, biases = w[:, :features].astype(kind), w[:, features].astype(kind)
    codes = codes.astype(kind)
    scores = np.zeros((len(vectors), units), dtype=kind)
    entering = np.where(stimulus.in_valid & stimulus.expect_in_ready, stimulus.in_index, -1)
    leaving = np.where(stimulus.expect_out_valid & stimulus.out_ready,
                       stimulus.expect_out_index, -1)
    strobes, write_addresses, data = write_columns(stimulus)
    read_width = max(widths)
    read_data = np.zeros(stimulus.cycles, dtype=np.int64)
    count = len(widths)
    lag, read_latency = config.learning_lag, config.learning_read_latency
    writes = [None] * config.learning_write_latency     # writes held, oldest first
    seen = (weights.copy(), biases.copy())     # the registers the datapath reads
    for cycle in range(stimulus.cycles):
        address = int(addresses[cycle])
        if address < count:
            unit, index = divmod(address, features + 1)
            shown_w, shown_b = seen if lag else (weights, biases)
            value = shown_w[unit, index] if index < features else shown_b[unit]
            read_data[cycle] = int(value) & ((1 << read_width) - 1)
        vector = entering[cycle]
        if vector >= 0:
            read_w, read_b = seen if lag else (weights, biases)
            scores[vector] = read_w @ codes[vector] + read_b
        if lag:
            seen = (weights.copy(), biases.copy())
        vector = leaving[cycle]
        if vector >= 0 and labelled[vector] and not flagged[vector]:
            steps = rule.steps(codes[vector].astype(np.int64))
            for unit in range(units):
                target = (int(targets[vector]) >> unit) & 1
                if (scores[vector, unit] > 0) != bool(target):
                    row, bias = rule.update(weights[unit], biases[unit], steps,
                                            1 if target else -1)
                    weights[unit], biases[unit] = row, bias
        writes.append((int(write_addresses[cycle]), int(data[cycle]))
                      if strobes[cycle] else None)
        write = writes.pop(0)
        if write is not None and write[0] < count:
            address = write[0]
            unit, index = divmod(address, features + 1)
            value = register_value(write[1], widths[address])
            if index < features:
                weights[unit, index] = value
            else:
                biases[unit] = value
    if read_latency:
        read_data = np.concatenate([np.zeros(read_latency, dtype=np.int64),
                                    read_data[:stimulus.cycles - read_latency]])
    final = ([[int(v) for v in row] for row in weights], [int(v) for v in biases])
    if model.is_bank:
        decisions = np.array([max(range(units), key=lambda u: (row[u], -u)) for row in scores],
                             dtype=np.int64)
        return scores, decisions, read_data, final
    return scores[:, 0], (scores[:, 0] > 0).astype(np.uint8), read_data, final


def with_learning(stimulus, config, seed, *, labelled=None, targets=None,
                  writes_in_updates=True):
    """``stimulus`` with labelled vectors (``labelled``/``targets`` given, or drawn: about
    :data:`LABELLED_SHARE` of them, random target bits), a random read-back address every
    cycle, and the expectations of :func:`learning_trace`. ``writes_in_updates``: about
    :data:`WRITE_SHARE` of the cycles where a labelled result leaves (an update may land)
    also write a random register through the port, so the rule that the write wins is
    exercised; off where a run must learn exactly what ``fit`` learns."""
    rng = np.random.default_rng([11, *np.atleast_1d(seed).tolist()])
    count, units = len(stimulus.vectors), len(config.model.units)
    if labelled is None:
        labelled = rng.random(count) < LABELLED_SHARE
    if targets is None:
        targets = rng.integers(0, 1 << units, count)
    labelled = np.asarray(labelled, dtype=bool)
    targets = np.asarray(targets, dtype=np.int64)
    widths = register_file(config)[0]
    registers = len(widths)
    address_bits = max(1, (registers - 1).bit_length())
    addresses = rng.integers(0, 1 << address_bits, stimulus.cycles)
    if writes_in_updates and count:
        stimulus = _writes_in_updates(stimulus, labelled, widths, rng,
                                      config.learning_write_latency)
    scores, decisions, read_data, _ = learning_trace(stimulus, config, labelled, targets,
                                                     addresses)
    presented = np.clip(stimulus.in_index // stimulus.beats, 0, max(count - 1, 0))
    shown = presented if count else np.zeros(stimulus.cycles, dtype=np.int64)
    inputs = {"enable": labelled[shown].astype(np.int64) if count else shown,
              "target": targets[shown] if count else shown,
              "read_address": addresses.astype(np.int64)}
    run = SideRun(LEARNING, inputs, {"read_data": read_data})
    return replace(stimulus, expect_scores=scores, expect_decisions=decisions, bus=run)


def _writes_in_updates(stimulus, labelled, widths, rng, latency=0):
    """``stimulus`` with a write of a random register (random bits of its width) in about
    :data:`WRITE_SHARE` of the cycles where a labelled result leaves ``latency`` cycles later
    (a write's wait before it lands) and nothing is written."""
    strobes, addresses, data = (np.array(c, copy=True) for c in write_columns(stimulus))
    leaving = stimulus.expect_out_valid & stimulus.out_ready
    index = np.clip(stimulus.expect_out_index, 0, len(labelled) - 1)
    lands = np.flatnonzero(leaving & labelled[index])
    cycles = lands - latency
    cycles = cycles[(cycles >= 0) & (strobes[np.maximum(cycles, 0)] == 0)]
    cycles = cycles[rng.random(len(cycles)) < WRITE_SHARE]
    if max(widths) > 62:
        data = data.astype(object)          # (Python integers past int64)
    for cycle in cycles:
        address = int(rng.integers(0, len(widths)))
        strobes[cycle], addresses[cycle] = 1, address
        bits = widths[address]
        data[cycle] = int.from_bytes(rng.bytes((bits + 7) // 8), "little") & ((1 << bits) - 1)
    return replace(stimulus, writes=(strobes, addresses, data))
