"""Per-cycle stimulus and expected responses, shared by every simulator.

A run is built once from the vectors and the cycle-exact handshake model; each simulator only
replays the inputs and records the outputs, and :func:`~thresh2hdl.verify.compare.compare`
judges every cycle against the expectations here. Seeded gaps in ``in_valid`` and stalls on
``out_ready`` exercise the handshake.
"""

from dataclasses import dataclass, replace

import numpy as np

from ..names import weight_registers
from .reference import ReferenceModel, cycle_model

__all__ = ["Stimulus", "make_stimulus", "make_reload_stimulus", "write_columns",
           "with_held_cycles", "enable_column", "HOLD_PROBABILITY"]


@dataclass(frozen=True)
class Stimulus:
    """Inputs per cycle (after one reset cycle) and what the reference expects per cycle."""

    latency: int
    vectors: np.ndarray        # (count, features)
    in_valid: np.ndarray       # (cycles,)
    out_ready: np.ndarray
    in_index: np.ndarray       # which beat is presented on the inputs in each cycle
    expect_in_ready: np.ndarray
    expect_out_valid: np.ndarray
    expect_out_index: np.ndarray
    expect_scores: np.ndarray  # per vector
    expect_decisions: np.ndarray
    beats: int = 1             # valid beats per vector: 1, or one per feature (serial)
    writes: tuple | None = None  # loadable weights: per-cycle (strobe, address, data) arrays
    expect_flags: np.ndarray | None = None  # per vector: the out-of-range flag (None: no flag)
    flag_masks_results: bool = False  # flag without clamp: a flagged result is not specified
    enable: np.ndarray | None = None  # the clock enable per cycle (None: no enable, or high)
    bus: object | None = None  # AXI4-Lite weight port: a register_bus.BusRun (None: no bus)

    @property
    def cycles(self):
        return len(self.in_valid)

    @property
    def beat_codes(self):
        """What each beat carries: a whole vector, or (serial) one feature, in order."""
        if self.beats == 1:
            return self.vectors
        return self.vectors.reshape(-1, 1)

    @property
    def inputs(self):
        """Values presented in each cycle, shape (cycles, values per beat)."""
        return self.beat_codes[self.in_index]

    @property
    def in_vector(self):
        """Which vector the beat presented in each cycle belongs to."""
        return self.in_index // self.beats


STALL_SEGMENT = 20_000   # vectors run with random out_ready stalls; the rest without


def _free_flowing(first_index, count, latency, rng, valid_probability, beats=1):
    """Cycles for ``count`` vectors with random gaps on in_valid and out_ready held high.

    With the sink always ready the pipeline never stalls, so the handshake model reduces to a
    delay line (of the last beats) and the whole segment is computed with array operations.
    """
    total = count * beats
    cycles = int(total / valid_probability * 1.05) + 64
    offered = rng.random(cycles) < valid_probability
    while np.count_nonzero(offered) < total:
        offered = np.concatenate([offered, rng.random(cycles) < valid_probability])
    last = int(np.flatnonzero(offered)[total - 1])
    in_valid = np.concatenate([offered[: last + 1], np.zeros(latency, dtype=bool)])
    accepted_before = np.cumsum(in_valid) - in_valid
    beat_index = np.minimum(accepted_before, total - 1)
    in_index = first_index * beats + beat_index
    finishing = in_valid & (beat_index % beats == beats - 1)
    out_valid = np.zeros(len(in_valid), dtype=bool)
    out_index = np.full(len(in_valid), -1, dtype=np.int64)
    out_valid[latency:] = finishing[: len(in_valid) - latency]
    out_index[latency:] = np.where(finishing[: len(in_valid) - latency],
                                   in_index[: len(in_valid) - latency] // beats, -1)
    ones = np.ones(len(in_valid), dtype=bool)
    return {"in_valid": in_valid, "in_ready": ones, "out_valid": out_valid, "out_ready": ones,
            "in_index": in_index.astype(np.int64), "out_index": out_index}


def make_stimulus(reference, vectors, *, latency, beats=1, seed=0, valid_probability=0.9,
                  ready_probability=0.9, stall_vectors=STALL_SEGMENT, guard=None):
    """Cycles for every vector: the first ``stall_vectors`` through the full handshake model
    with random gaps and stalls, the rest with gaps only (a long random run). ``beats``: valid
    beats per vector (a component's ``beats``: one per feature for the serial architecture).
    ``guard``: the design's :class:`~thresh2hdl.analysis.guard.InputGuard`, which says what a code
    outside the declared ranges gives."""
    vectors = np.asarray(vectors, dtype=np.int64)
    rng = np.random.default_rng(seed)
    chunk = 4096
    offers, accepts = [], []

    def draw(store, probability, t):
        while t >= len(store):
            store.extend((rng.random(chunk) < probability).tolist())
        return store[t]

    stalled = min(len(vectors), stall_vectors)
    segments = [cycle_model(latency, stalled,
                            offer=lambda t: draw(offers, valid_probability, t),
                            accept=lambda t: draw(accepts, ready_probability, t), beats=beats)]
    if len(vectors) > stalled:
        # The first segment ends drained (every result out), so this one starts empty.
        segments.append(_free_flowing(stalled, len(vectors) - stalled, latency, rng,
                                      valid_probability, beats))
    trace = {key: np.concatenate([segment[key] for segment in segments])
             for key in segments[0]}
    scores = reference.scores(_arithmetic_codes(vectors, guard))
    flags = guard.outside(vectors) if guard is not None and guard.flag else None
    return Stimulus(latency=latency, vectors=vectors, in_valid=trace["in_valid"],
                    out_ready=trace["out_ready"], in_index=trace["in_index"],
                    expect_in_ready=trace["in_ready"], expect_out_valid=trace["out_valid"],
                    expect_out_index=trace["out_index"],
                    expect_scores=scores, expect_decisions=reference.decide(scores),
                    beats=beats, expect_flags=flags,
                    flag_masks_results=_masks(guard))


def _arithmetic_codes(vectors, guard):
    """The codes whose model the results must equal: clamped where the guard clamps. With the
    flag alone a flagged result is not specified, and its expectation (never compared) is
    taken on clamped codes too, so that the reference stays within its exact range."""
    if guard is None or not guard.needed:
        return vectors
    return replace(guard, clamp=True).apply(vectors)


def _masks(guard):
    return guard is not None and guard.flag and not guard.clamp and guard.needed


HOLD_PROBABILITY = 0.1   # the chance of one more held cycle before each cycle


def with_held_cycles(stimulus, seed, probability=HOLD_PROBABILITY):
    """``stimulus`` with cycles of the clock enable low inserted at random, as runs of one or
    more before a cycle. A held cycle changes no register, so each cycle of the original
    still sees the state it saw; in a held cycle the inputs are those of the cycle after it
    (a write strobe included, which must be ignored) with random ``in_valid`` and
    ``out_ready``, and ``in_ready`` and ``out_valid`` are expected 0."""
    rng = np.random.default_rng([7, *np.atleast_1d(seed).tolist()])
    cycles = stimulus.cycles
    held_before = rng.geometric(1 - probability, cycles) - 1
    order = np.repeat(np.arange(cycles), held_before + 1)
    # The last row of each cycle's repeats is the cycle itself; those before it are held.
    ends = np.cumsum(held_before + 1) - 1
    enable = np.zeros(len(order), dtype=bool)
    enable[ends] = True
    held = ~enable

    def spread(column, when_held):
        out = np.asarray(column)[order]
        if when_held is not None:
            out = out.copy()
            out[held] = when_held
        return out

    noise = rng.random((2, len(order))) < 0.5
    writes = None if stimulus.writes is None else \
        tuple(spread(column, None) for column in stimulus.writes)
    return replace(stimulus, in_valid=np.where(held, noise[0], stimulus.in_valid[order]),
                   out_ready=np.where(held, noise[1], stimulus.out_ready[order]),
                   in_index=spread(stimulus.in_index, None),
                   expect_in_ready=spread(stimulus.expect_in_ready, False),
                   expect_out_valid=spread(stimulus.expect_out_valid, False),
                   expect_out_index=spread(stimulus.expect_out_index, -1),
                   writes=writes, enable=enable)


def enable_column(stimulus):
    """The clock enable per cycle (high throughout when the stimulus holds no cycle)."""
    if stimulus.enable is not None:
        return stimulus.enable
    return np.ones(stimulus.cycles, dtype=bool)


def write_columns(stimulus):
    """The write port's per-cycle strobe, address and data (all zero when nothing is written)."""
    if stimulus.writes is not None:
        return stimulus.writes
    zeros = np.zeros(stimulus.cycles, dtype=np.int64)
    return zeros, zeros, zeros


def _write_cycles(model):
    """(address, value) of every register of a model's weights: the write port's map."""
    return [(address, value) for address, (_, value) in enumerate(weight_registers(model))]


def make_reload_stimulus(first, reloads, *, latency, beats=1, seed=0, **options):
    """A run that loads new weights between segments: ``first`` is the stimulus with the
    weights the registers start with; ``reloads`` lists ``(model, vectors)`` to write and
    then run. Writes happen with the design idle (every result out) and ``in_valid`` low,
    one register per cycle; each segment is judged by the reference of its own weights."""
    parts = [first]
    strobes, addresses, data = [np.zeros(first.cycles, dtype=np.int64)] * 3
    strobes, addresses, data = [strobes], [addresses], [data]
    for index, (model, vectors) in enumerate(reloads):
        writes = _write_cycles(model)
        count = len(writes)
        idle = np.zeros(count, dtype=bool)
        parts.append(Stimulus(latency=latency, vectors=np.zeros((0, first.vectors.shape[1]),
                                                                dtype=np.int64),
                              in_valid=idle, out_ready=~idle, in_index=np.zeros(count, np.int64),
                              expect_in_ready=~idle, expect_out_valid=idle,
                              expect_out_index=np.full(count, -1, np.int64),
                              expect_scores=first.expect_scores[:0],
                              expect_decisions=first.expect_decisions[:0], beats=beats,
                              expect_flags=None if first.expect_flags is None
                              else first.expect_flags[:0]))
        strobes.append(np.ones(count, dtype=np.int64))
        addresses.append(np.array([a for a, _ in writes], dtype=np.int64))
        data.append(np.array([v for _, v in writes], dtype=object))
        rows = np.asarray(getattr(vectors, "array", vectors), dtype=np.int64)
        segment = make_stimulus(ReferenceModel.from_model(model), rows, latency=latency,
                                beats=beats, seed=[seed, index + 1], **options)
        parts.append(segment)
        zeros = np.zeros(segment.cycles, dtype=np.int64)
        strobes.append(zeros)
        addresses.append(zeros)
        data.append(zeros)
    offsets = np.cumsum([0] + [len(p.vectors) for p in parts[:-1]])
    scores = [np.asarray(p.expect_scores) for p in parts]
    if any(s.dtype == object for s in scores):
        scores = [s.astype(object) for s in scores]
    return Stimulus(
        latency=latency, vectors=np.concatenate([p.vectors for p in parts]),
        in_valid=np.concatenate([p.in_valid for p in parts]),
        out_ready=np.concatenate([p.out_ready for p in parts]),
        in_index=np.concatenate([p.in_index + o * beats for p, o in zip(parts, offsets)]),
        expect_in_ready=np.concatenate([p.expect_in_ready for p in parts]),
        expect_out_valid=np.concatenate([p.expect_out_valid for p in parts]),
        expect_out_index=np.concatenate([np.where(p.expect_out_index >= 0,
                                                  p.expect_out_index + o, -1)
                                         for p, o in zip(parts, offsets)]),
        expect_scores=np.concatenate(scores),
        expect_decisions=np.concatenate([p.expect_decisions for p in parts]),
        beats=beats, writes=(np.concatenate(strobes), np.concatenate(addresses),
                             np.concatenate(data)),
        expect_flags=None if first.expect_flags is None
        else np.concatenate([p.expect_flags for p in parts]),
        flag_masks_results=first.flag_masks_results)
