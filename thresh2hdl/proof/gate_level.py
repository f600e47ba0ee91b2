"""A netlist written back by synthesis, run through its proof: recognised at gate level, proved
equivalent to the folder's own Verilog (:mod:`.equivalence`), and where it is not, searched
for an input that shows it (first in a simulator with the cell models, then by the solver on
the netlist read with them)."""

import tempfile
import time
from pathlib import Path

from ..analysis import signed_bits
from ..tools import warm_up
from .equivalence import prove_equivalent, read_gate_netlist
from .forms import Plan
from .outcome import ProofOutcome, Undecided
from .prover import MIN_WIDTH, proof_tools
from .query import port_names
from .search import find_counterexample
from .smt import SmtExport, export_smt2

__all__ = ["gate_netlist", "prove_gate_netlist", "GATE_METHOD"]

GATE_METHOD = ("equivalent to the folder's own file {own}, which is proved equal to the "
               "model: registers paired by name, each pair's next value and each output one "
               "lemma whenever the pairs agree (Yosys write_smt2 of both designs, Boolector)"
               "{cells}")


def gate_netlist(verilog_text, module):
    """The netlist's :class:`~.equivalence.GateNetlist` when it is at gate level, else None
    (a word-level design: the lemmas' kind)."""
    yosys, _ = proof_tools()
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-gate-") as name:
        return read_gate_netlist(yosys, verilog_text, module, Path(name))


def _outcome(status, detail, started, versions, tools, lemmas=0, failing=(), candidate=None,
             width=0):
    return ProofOutcome(status, detail, lemmas, tuple(failing), candidate, versions[1],
                        versions[0], time.perf_counter() - started, width, **tools)


def prove_gate_netlist(verilog_text, gate, own_text, component, model, port_rows, *,
                       timeout_s, progress=None, quick_search=None):
    """Prove the gate-level ``verilog_text`` equivalent to ``own_text`` (the folder's own file,
    already proved equal to the model; None when it is not). A :class:`ProofOutcome`: proved;
    counterexample (with the solver's candidate, or none when ``quick_search`` found a
    mismatch in a simulator); undecided with the reason."""
    yosys, boolector = proof_tools()
    warm = time.perf_counter()
    (yosys_version, yosys_new), (solver_version, solver_new) = \
        warm_up(yosys, progress), warm_up(boolector, progress)
    tools = {"warmup_seconds": time.perf_counter() - warm,
             "compiled": tuple(n for n, new in (("Yosys", yosys_new), ("Boolector", solver_new))
                               if new)}
    versions = (yosys_version, solver_version)
    started = time.perf_counter()
    if gate.refused:
        return _outcome("undecided", gate.refused, started, versions, tools)
    if own_text is None:
        return _outcome("undecided", "the folder's own file is not proved equal to the model, "
                        "so an equivalence to it would not reach the model; prove it first",
                        started, versions, tools)
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-equiv-") as name:
        folder = Path(name)
        if progress is not None:
            progress("pairing the netlist's registers with the folder's own file")
        try:
            answer = prove_equivalent(yosys, boolector, own_text, verilog_text, gate,
                                      model.module, port_rows, folder, started + timeout_s)
        except Undecided as why:
            return _outcome("undecided", str(why), started, versions, tools)
        if answer.status != "failed":
            return _outcome(answer.status, answer.detail, started, versions, tools,
                            answer.lemmas, answer.failing)
        detail = answer.detail
        if quick_search is not None and quick_search() is not None:
            return _outcome("counterexample", detail, started, versions, tools,
                            answer.lemmas, answer.failing)
        candidate, width = _solver_search(yosys, boolector, verilog_text + "\n"
                                          + gate.simulation_text, component, model, port_rows,
                                          folder, started + timeout_s - time.perf_counter())
        return _outcome("counterexample", detail, started, versions, tools, answer.lemmas,
                        answer.failing, candidate, width)


def _solver_search(yosys, boolector, text, component, model, port_rows, folder, left):
    """The solver's input whose outputs differ from the model's after the latency, on the
    netlist read with its cell models (None when it finds none in time)."""
    plan = Plan(component, model)
    smt2, _ = export_smt2(yosys, text, model.module, folder)
    smt = SmtExport(smt2, model.module)
    width = max(MIN_WIDTH, max([signed_bits(v.lo, v.hi) for v in plan.values.values()]
                               + [1]) + 2)
    ports = port_names(getattr(port_rows, "logical", port_rows))
    return find_counterexample(plan, smt, width, ports, model, folder, boolector,
                               max(5.0, left)), width
