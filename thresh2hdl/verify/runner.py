"""The chunk runner: corner cases, data rows and random vectors through one simulator back end,
judged against the integer reference model chunk by chunk while the next chunks simulate."""

import os
from collections import deque
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace
from functools import partial

import numpy as np

from ..hardware import register_file
from ..tools import which_tool
from .reference import ReferenceModel
from .sim_amaranth import AmaranthBackend
from .sim_icarus import IcarusBackend, icarus_version
from .sim_verilator import VerilatorBackend, find_verilator, verilator_version
from .learning import with_learning
from .register_bus import with_axi_lite
from .stimulus import make_reload_stimulus, make_stimulus, with_held_cycles
from .vectors import RANDOM_GROUP, make_vectors, random_vectors, reload_sets

__all__ = ["choose_simulator", "make_backend", "chunk_vectors", "Verification", "verify",
           "first_stimulus", "CHUNK_VECTORS", "CHUNK_CODES"]


def choose_simulator(name):
    """``auto``: Verilator when present, else Icarus, else Amaranth's simulator."""
    if name == "verilator":
        verilator_version()     # a missing tool is said before any work
    elif name == "icarus":
        icarus_version()
    if name != "auto":
        return name
    if find_verilator() and which_tool("c++"):
        return "verilator"
    if which_tool("iverilog") and which_tool("vvp"):
        return "icarus"
    return "amaranth"


def make_backend(simulator, *, component=None, verilog_text=None, ports=None, module=None):
    """The back end of ``simulator`` (a name :func:`choose_simulator` returns), made from what
    it runs: Amaranth's simulator the ``component``; Verilator and Icarus the Verilog text
    with its ``ports`` (:func:`~thresh2hdl.emit.verilog.port_table`) and ``module`` name."""
    if simulator == "amaranth":
        if component is None:
            raise ValueError("Amaranth's simulator runs a component; none was given")
        return AmaranthBackend(component)
    kinds = {"verilator": VerilatorBackend, "icarus": IcarusBackend}
    if simulator not in kinds:
        raise ValueError(f"no simulator {simulator!r}; one of amaranth, verilator, icarus")
    if verilog_text is None or ports is None or module is None:
        raise ValueError(f"{simulator} runs Verilog: give its text, ports and module")
    return kinds[simulator](verilog_text, ports, module)


CHUNK_VECTORS = 250_000   # random vectors simulated at a time: bounded memory, warm caches


# Codes per chunk: keeps each int64 array of a chunk near 24 MB, below the size from which the C
# allocator maps fresh pages for every array (first touch of fresh pages cost as much as the
# arithmetic on them, measured here).
CHUNK_CODES = 3_000_000


def chunk_vectors(features, beats=1):
    """Random vectors per chunk for a model of ``features`` inputs; a serial design (one beat
    per feature) has a cycle per code, so its chunks are bounded by codes alone."""
    if beats > 1:
        return max(256, CHUNK_CODES // max(1, features))
    return min(CHUNK_VECTORS, max(16_384, CHUNK_CODES // max(1, features)))


@dataclass(frozen=True)
class Verification:
    simulator: str
    simulator_version: str
    vectors_checked: int
    mismatches: int
    cycles: int
    vector_groups: tuple
    first_mismatches: tuple
    exported: object        # the first chunk's stimulus (corners, data, first random vectors)


def verify(backend, component, model, *, count, seed=0, data=None, progress=None):
    """Corner cases, optional data rows and ``count`` random vectors of ``component`` (its
    plan, latency and guard) through one simulator ``backend`` (:func:`make_backend`).

    The first chunk holds the corners, the data rows and a segment with random stalls; later
    chunks of :func:`chunk_vectors` random vectors run with gaps only. Each chunk is judged by
    the reference model while the next ones are simulated; every chunk runs, so the count of
    mismatches is over every vector and the first named is the earliest.
    """
    analysis = component.analysis
    reference = ReferenceModel.from_model(model)
    names = [f.name for f in model.features]
    per_chunk = chunk_vectors(len(names), component.beats)
    first_count = min(count, per_chunk)
    guard = component.config.guard
    vectors = make_vectors(analysis, random_count=first_count, seed=seed, data=data,
                           others=component.unit_analyses[1:], guard=guard)
    stimulus, reloaded = first_stimulus(component, model, vectors.array, seed=seed,
                                        reload_count=min(2000, max(100, count // 4)))
    exported = stimulus
    groups = [list(g) for g in vectors.groups]
    # Later chunks are more random vectors: counted in that group (there are none without it).
    random_group = next((k for k, (name, _) in enumerate(groups) if name == RANDOM_GROUP), 0)
    groups += [list(g) for g in reloaded]
    checked_total = mismatches = cycles = 0
    first = ()
    remaining, chunk = count - first_count, 0
    workers = _workers(backend, per_chunk * len(names) * 8)
    pool = ThreadPoolExecutor(max_workers=workers) if workers else None

    def submit(stimulus, note):
        if pool is None:
            return _Later(backend.run, stimulus, note)
        return pool.submit(backend.run, stimulus, note)

    flight = deque()
    planned = 0

    def launch():
        nonlocal remaining, planned
        while len(flight) < max(1, workers) and remaining > 0:
            planned += 1
            size = min(remaining, per_chunk)
            upcoming = _random_chunk(reference, component, size, seed, planned)
            remaining -= size
            flight.append((planned, size, upcoming, submit(upcoming, None)))

    try:
        flight.append((0, 0, stimulus, submit(stimulus, progress)))
        while flight:
            chunk, size, stimulus, running = flight.popleft()
            launch()
            result = running.result()
            if progress is not None and count > per_chunk:
                progress(min(count, first_count + chunk * per_chunk), count,
                         f"verifying in {backend.name}")
            checked = result.check(stimulus)
            checked_total += checked.vectors_checked
            mismatches += checked.mismatch_count
            groups[random_group][1] += size
            if checked.mismatches and not first:
                # Chunks run in order, so the first chunk with a mismatch holds the earliest;
                # its cycles are counted from the start of the whole run.
                origin = partial(_first_origin, vectors, reloaded) if chunk == 0 else \
                    (lambda i, k=chunk: (f"{RANDOM_GROUP}, chunk {k}", i))
                first = tuple(replace(m, cycle=m.cycle + cycles).describe(stimulus, names,
                                                                          origin)
                              for m in checked.mismatches)
            cycles += stimulus.cycles
    finally:
        if pool is not None:
            pool.shutdown(wait=False, cancel_futures=True)
    return Verification(backend.name, backend.version(), checked_total, mismatches, cycles,
                        tuple(tuple(g) for g in groups), first, exported)


def _workers(backend, chunk_bytes):
    """Chunks simulated at a time. Verilator and Icarus run in processes of their own: up to
    two (one per core, while their vectors fit in a few hundred MB) while this thread makes
    the next chunk and judges the last. A back end that runs in this process gets no thread
    (Ctrl-C must stop it at once)."""
    if backend.in_process:
        return 0
    return 1 if (os.cpu_count() or 1) < 2 or chunk_bytes > 128 << 20 else 2


def _random_chunk(reference, component, size, seed, chunk):
    """The stimulus of a later chunk: ``size`` random vectors, with gaps only."""
    rows = random_vectors(np.random.default_rng([seed, chunk]),
                          component.analysis.feature_ranges, size)
    stimulus = make_stimulus(reference, rows, latency=component.latency, beats=component.beats,
                             seed=[seed, chunk], stall_vectors=0, guard=component.config.guard)
    return _held(component, stimulus, [seed, chunk])


def _held(component, stimulus, seed):
    """With a clock enable, the stimulus with held cycles (enable low) among its cycles; with
    the AXI4-Lite weight port, its writes and reads through the bus; with on-chip learning,
    labelled vectors, read-back and the expectations of the learning registers."""
    config = component.config
    if config.on_chip_learning:
        return with_learning(stimulus, config, seed)
    if config.loadable_weights and config.weight_port == "axi4-lite":
        return with_axi_lite(stimulus, *register_file(config), seed)
    return with_held_cycles(stimulus, seed) if config.clock_enable else stimulus


def _first_origin(vectors, reloaded, index):
    """Where a vector of the first chunk came from: a group, or a weight set loaded."""
    if index < len(vectors):
        return vectors.origin(index)
    index -= len(vectors)
    for name, size in reloaded:
        if index < size:
            return name, index
        index -= size
    raise IndexError(index)


class _Later:
    """A call made when its result is asked for (the in-process simulator's "future")."""

    def __init__(self, function, *args):
        self.function, self.args = function, args

    def result(self):
        return self.function(*self.args)


def first_stimulus(component, model, rows, *, seed=0, reload_count=2000, **options):
    """The stimulus of ``rows``; with loadable weights, followed by weight sets written
    through the port and vectors run with each (see :func:`~thresh2hdl.verify.vectors.reload_sets`).
    Returns the stimulus and the ``(group name, vectors)`` of the reloads."""
    reference = ReferenceModel.from_model(model)
    options["guard"] = component.config.guard
    stimulus = make_stimulus(reference, rows, latency=component.latency, beats=component.beats,
                             seed=seed, **options)
    if not component.config.loadable_weights:
        return _held(component, stimulus, seed), ()
    analysis = component.analysis
    sets = reload_sets(model, analysis.weight_range, analysis.bias_range,
                       random_count=reload_count, seed=seed, guard=component.config.guard)
    groups = [(f"loaded set {k + 1}: {name}", size) for k, (_, vectors) in enumerate(sets)
              for name, size in vectors.groups]
    reloaded = make_reload_stimulus(stimulus, sets, latency=component.latency,
                                    beats=component.beats, seed=seed, **options)
    return _held(component, reloaded, seed), tuple(groups)
