"""Proving a Verilog file equal to its model, the confirmation of a counterexample in a
simulator, and the proof's place in a build folder's report."""

import hashlib
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError, MismatchError, UndecidedError
from ..emit import port_table
from ..outdir import write_files
from ..proof import (DEFAULT_TIMEOUT_S, GATE_METHOD, gate_netlist, prove_gate_netlist,
                     prove_netlist)
from ..tools import which_tool
from ..verify import ReferenceModel, choose_simulator, make_backend, make_stimulus
from .folder import load_folder, report_files
from .languages import verilog_of
from .options import check_timeout
from .progress import progress_of
from .sim_search import SEARCH_VECTORS, search_by_simulation

__all__ = ["ProofResult", "counterexample_file", "prove", "prove_text"]

# The one name versions before netlist proofs were recorded gave any netlist's counterexample;
# a folder may still hold one that its report does not name.
LEGACY_COUNTEREXAMPLE = "counterexample.csv"
LEMMA_METHOD = ("one lemma per datapath value and register (Yosys write_smt2, Boolector), cut "
                "points at closed subtrees")
# The report's method_kind: the lemmas against the model, or a gate-level netlist's
# equivalence to the folder's own file (older reports have no key: the lemmas).
VALUE_LEMMAS, GATE_EQUIVALENCE = "value-lemmas", "gate-equivalence"
PROOF_STATEMENT = ("for every input in the declared feature ranges, the outputs equal the "
                   "integer model's (decision{extra}), with any handshake")

LEARNING_STATEMENT = (
    "; the update step is covered: from any register contents, a register not reset or "
    "written takes, when a labelled sample's result leaves (not flagged out of range) and its "
    "unit's own decision (score > 0) differs from the target bit, itself moved by the rule's "
    "step (eta x, or the bias step) towards the target and clamped to its signed range, and "
    "otherwise keeps its value (a write in the same cycle wins); the read-back port gives the "
    "addressed register, 0 past the last")


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
        line = (f"{s['netlist']}: {s['status']} ({s.get('method_kind', VALUE_LEMMAS)}, "
                f"{s['lemmas']} lemmas, {s['solver']}, {s['yosys']}, {self.seconds:.1f} s)")
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


def _statement(component, model):
    """What the proof shows, in words, for this design's outputs and input guard."""
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
    config = component.config
    if config.loadable_weights:
        held = "as the registers held them when the vector entered" \
            if config.on_chip_learning else "unchanged while a vector is in flight"
        statement = statement.replace(
            "the outputs equal", f"and every weight and bias their declared widths allow "
            f"({held}), the outputs equal") \
            .replace("integer model's", "integer model's with the weights the registers hold")
        statement += ("; a write stores the data's low bits in the addressed register from the "
                      "next clock, and a reset restores the trained values"
                      if config.weight_port == "plain" else
                      "; the AXI4-Lite slave's writes and reads are verified in simulation, "
                      "not proved")
    if config.on_chip_learning:
        statement += LEARNING_STATEMENT
    if component.config.clock_enable:
        statement += ("; shown with the clock enable high, and a cycle with it low (the reset "
                      "released) changes no register and reads in_ready and out_valid 0")
    return statement


def prove_text(text, name, component, model, ports, *, timeout_s, simulator, progress,
               own=True, gate=None, own_file=None):
    """Prove ``text`` (file ``name``; ``own``: the folder's own Verilog) and confirm a
    counterexample in a simulator. ``progress``: a :class:`~.progress.Progress`. With ``gate``
    (the netlist at gate level), by its equivalence to ``own_file``: ``(file name, its text
    if proved equal to the model, else None)``; simulated with the gate's cell models."""
    clock = time.perf_counter()
    auto = simulator == "auto"
    simulator = choose_simulator(simulator)
    if (gate is not None and gate.family or auto and simulator == "verilator") and \
            which_tool("iverilog") and which_tool("vvp"):
        # The search's 2,000 vectors: Icarus runs them before Verilator has compiled; and
        # it reads Yosys's cell models as they are.
        simulator = "icarus"
    design_text = text
    if gate is not None:
        text = text + "\n" + gate.simulation_text       # what the simulators compile
    searched = {}

    def quick_search():
        # Tried once, where a lemma fails or the method cannot follow the netlist: the whole
        # design in a simulator (a second or two) before the solver's own search.
        if "result" not in searched:
            searched["result"] = None if simulator == "amaranth" else \
                search_by_simulation(simulator, component, text, ports, model)
        return searched["result"]

    if gate is None:
        outcome = prove_netlist(text, component, model, ports, timeout_s=timeout_s,
                                progress=progress.note, quick_search=quick_search)
        method, kind = LEMMA_METHOD, VALUE_LEMMAS
    else:
        outcome = prove_gate_netlist(design_text, gate, own_file[1], component, model, ports,
                                     timeout_s=timeout_s, progress=progress.note,
                                     quick_search=quick_search)
        cells = f"; {gate.family} cells read with Yosys's {gate.family}/cells_sim.v" \
            if gate.family else ""
        method, kind = GATE_METHOD.format(own=own_file[0], cells=cells), GATE_EQUIVALENCE
    section = {"status": outcome.status, "netlist": name,
               "netlist_sha256": hashlib.sha256(design_text.encode("utf-8")).hexdigest(),
               "statement": _statement(component, model),
               "method": method, "method_kind": kind,
               "lemmas": outcome.lemmas, "solver": outcome.solver, "yosys": outcome.yosys,
               "arithmetic_bits": outcome.width_bits, "timeout_s": timeout_s,
               "detail": outcome.detail, "failing_lemmas": list(outcome.failing[:20]),
               "counterexample": None}
    csv_text = None
    names = [f.name for f in model.features]
    if outcome.status == "counterexample" and outcome.candidate is not None:
        # The solver's candidate, confirmed in a simulator or not at all.
        section["status"] = "undecided"
        mismatch, version_text = _confirm(simulator, component, text, ports, model,
                                          outcome.candidate)
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
    elif outcome.status in ("counterexample", "undecided"):
        section["status"] = "undecided"
        if gate is not None and gate.refused:
            pass                # no models of its cells for a simulator either
        elif simulator == "amaranth":
            section["detail"] += "; no Verilog simulator to search for a counterexample"
        else:
            if "result" not in searched:
                progress.note(f"undecided by the method; searching for a counterexample in "
                              f"{simulator}")
            csv_text = _found(section, quick_search(), simulator, names, name, own)
    seconds = time.perf_counter() - clock - outcome.warmup_seconds
    return ProofResult(section, outcome, csv_text, seconds)


def _found(section, found, simulator, names, name, own):
    """The section after the simulation's search: its mismatch as the confirmed counterexample
    (the CSV text returned), or a note that it found none."""
    if found is None:
        section["detail"] += (f"; a simulation of the whole design in {simulator} (corners, "
                              f"ties, threshold and {SEARCH_VECTORS} random vectors, with "
                              f"handshake gaps and stalls) found no mismatch")
        return None
    vector, mismatch, version_text = found
    section["status"] = "counterexample"
    section["detail"] += "; a simulation of the whole design found a mismatch"
    section["counterexample"] = {"vector": dict(zip(names, vector)) if vector else {},
                                 "file": counterexample_file(name, own),
                                 "confirmed_in": version_text, "mismatch": mismatch}
    return ",".join(names) + "\n" + (",".join(map(str, vector)) + "\n" if vector else "")


def _own_proved(own, model, ports, report, component, timeout_s, simulator, progress):
    """``(file name, text)`` of the folder's own file, the text None unless it is proved equal
    to the model: by the report's proof of this very text, else by proving it now (recorded
    in ``report`` as its proof)."""
    text = verilog_of(own, model, ports)
    digest = hashlib.sha256(text.encode("utf-8")).hexdigest()
    recorded = report.get("proof")
    if isinstance(recorded, dict) and recorded.get("status") == "proved" and \
            recorded.get("netlist_sha256") == digest:
        return own.name, text
    progress.note(f"a gate-level netlist: proving the folder's own {own.name} first")
    result = prove_text(text, own.name, component, model, ports, timeout_s=timeout_s,
                        simulator=simulator, progress=progress)
    report["proof"] = result.section
    report.setdefault("timing", {}).update(
        {key: round(value, 3) for key, value in result.timing.items()})
    return own.name, text if result.ok else None


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
    check_timeout(timeout_s)
    progress = progress_of(progress)
    folder = load_folder(out_dir)
    out_dir, model, report, component = folder.path, folder.model, folder.report, \
        folder.component
    others = report.get("netlist_proofs") or {}
    if not isinstance(others, dict) or not all(isinstance(s, dict) for s in others.values()):
        raise InputError("netlist_proofs must map file names to proofs; remove the key or "
                         "rebuild the folder", source=out_dir / "report.json")
    ports = port_table(component, model)
    own = folder.design
    path = Path(netlist) if netlist is not None else own
    text = verilog_of(path, model, ports)     # a VHDL file: GHDL's reading of it
    is_own = path.resolve() == own.resolve()
    try:
        gate = None if is_own else gate_netlist(text, model.module)
        own_file = None if gate is None else (own.name, None) if gate.refused else \
            _own_proved(own, model, ports, report, component, timeout_s, simulator, progress)
        result = prove_text(text, path.name, component, model, ports, timeout_s=timeout_s,
                            simulator=simulator, progress=progress, own=is_own, gate=gate,
                            own_file=own_file)
    except InputError as error:
        raise InputError(str(error), source=path) from None
    if is_own:
        report["proof"] = result.section
        report.setdefault("timing", {}).update(
            {key: round(value, 3) for key, value in result.timing.items()})
    else:
        report["netlist_proofs"] = dict(sorted({**others, path.name: result.section}.items()))
    files = report_files(out_dir, report)
    if result.counterexample_csv is not None:
        files[out_dir / result.counterexample_file] = result.counterexample_csv
    write_files(files, force=True)
    named = {s["counterexample"].get("file") for s in [report.get("proof"),
                                                      *report.get("netlist_proofs", {}).values()]
             if isinstance(s, dict) and isinstance(s.get("counterexample"), dict)}
    for stale in {counterexample_file(path.name, is_own), LEGACY_COUNTEREXAMPLE} - named:
        (out_dir / stale).unlink(missing_ok=True)
    result.raise_unless_proved()
    return result
