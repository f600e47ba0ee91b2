"""Formal proof that a Verilog file computes the integer model for every input in range.

A plain miter (the file against ``w . x + b``) does not scale past a few inputs with any open
solver. What scales is one small lemma per value of the datapath, all checked in one query in
wide (at least 64-bit) arithmetic where nothing can overflow:

- each product wire equals ``x_i * |w_i|`` (or the shifted input of a signed digit);
- each adder wire equals its two operands added or subtracted exactly, the bias node its
  operand plus the bias; each argmax step picks the larger score, the lower index on ties;
- each pipeline register, when its stage loads a valid item, takes its source's value and,
  when it holds one, keeps it; the valid bits move with the handshake and clear on reset;
- each output equals the value it is planned to carry.

Every lemma is stated over the netlist's own wires with its operands as the netlist computes
them, so by induction from the inputs every wire equals its linear form, and the score output
equals the linear form of the root. A Python check then ties that form to the model: the
weights and bias composed along the plan must be exactly the
model's (:func:`forms.check_cover`).
The assumptions are the declared input ranges (none where the input guard clamps: then every
code the ports can carry is covered, the features taken clamped) and, for register contents,
the exact range of the value a register carries; the latter is recomputed here from the model,
not read from the range analysis. Inputs are constrained to their ranges, never truncated. The
out-of-range flag's lemmas are checked without the input ranges in any case.

A lemma that fails does not yet show a difference: a second query searches for an input whose
outputs, after the pipeline latency with the sink ready, differ from the model's (the
outcome's candidate counterexample), and the caller re-runs that input in a simulator before
it counts.

Tools: Yosys (``write_smt2``) and Boolector, the system's or the WebAssembly builds from PyPI
(``pip install 'thresh2hdl[prove]'``). The WebAssembly tools see only the working folder, so
every file is passed by a relative name.

The stages, one module each: the plan of values and their linear forms (``forms``), the
netlist's SMT export (``smt``) and its structure (``structure``), the query over it
(``query``), the lemmas (``lemmas``), the solver (``solve``), the counterexample search
(``search``); this module runs them in order.
"""

import tempfile
import time
from pathlib import Path

from ..analysis import signed_bits
from ..names import register_name
from ..tools import find_tool, warm_up
from .clocking import enable_high, held_cycle
from .forms import Plan
from .learning import LearningQuery, add_learning
from .lemmas import lemmas_of, weight_write_lemmas
from .outcome import DEFAULT_TIMEOUT_S, ProofOutcome, Undecided
from .query import Query, port_names
from .search import find_counterexample
from .serial import serial_lemmas
from .smt import SmtExport, export_smt2, wire_widths
from .solve import solve, solve_batches
from .structure import check_structure, constant_loads

__all__ = ["ProofOutcome", "prove_netlist", "proof_tools", "DEFAULT_TIMEOUT_S"]

MIN_WIDTH = 64


def proof_tools():
    """Paths of Yosys and Boolector; a :class:`ToolError` naming what to install if missing."""
    hint = "install the proof tools with pip install 'thresh2hdl[prove]'"
    return find_tool("yosys", hint), find_tool("boolector", hint)


def prove_netlist(verilog_text, component, model, port_rows, *, timeout_s=DEFAULT_TIMEOUT_S,
                  progress=None, quick_search=None):
    """Prove that ``verilog_text`` computes ``model`` exactly, or find where it does not.

    ``component`` gives the plan (values, stages) the lemmas follow; ``port_rows`` is
    :func:`thresh2hdl.emit.verilog.port_table` of it. ``quick_search``: a call tried when a
    lemma fails, before the solver's search; when it returns something (a mismatch a
    simulation found), the solver's search is skipped and the outcome has no candidate.
    Returns a :class:`ProofOutcome`.
    """
    yosys, boolector = proof_tools()
    versions, tools = _warm_up(yosys, boolector, progress)
    started = time.perf_counter()
    uncovered = _uncovered(component)
    if uncovered is not None:
        return ProofOutcome("undecided", f"{uncovered}; the design is verified cycle by cycle "
                            f"in simulation", 0, (), None, versions[1], versions[0],
                            time.perf_counter() - started, 0, **tools)
    serial = component.config.arch == "serial"
    try:
        plan = _SerialPlan(component, model) if serial else \
            add_learning(Plan(component, model), component)
    except Undecided as why:
        return ProofOutcome("undecided", f"{why}; the design is verified cycle by cycle in "
                            f"simulation", 0, (), None, versions[1], versions[0],
                            time.perf_counter() - started, 0, **tools)
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-prove-") as name:
        folder = Path(name)
        if progress is not None:
            progress("reading the netlist with Yosys")
        smt2, structure = export_smt2(yosys, verilog_text, model.module, folder)
        proof = _Proof(plan, model, smt2, port_rows, boolector, folder, started=started,
                       timeout_s=timeout_s, versions=versions, tools=tools, progress=progress)
        proof.quick_search = quick_search
        try:
            check_structure(structure, port_rows)
        except Undecided as why:
            return proof.outcome("undecided", str(why))
        proof.held = constant_loads(structure)
        return proof.run_serial(component) if serial else proof.run()


class _SerialPlan:
    """What the proof reads of a serial design's plan (its lemmas are per beat, from
    :mod:`.serial`, not per value)."""

    def __init__(self, component, model):
        self.model, self.values, self.loadable = model, {}, component.config.loadable_weights
        self.reset, self.clock_enable = component.config.reset, component.config.clock_enable
        self.latency = component.latency


def _warm_up(yosys, boolector, progress):
    """Each tool's first call, for its version, before the clock starts: a WebAssembly build
    compiles then on a new machine (a minute or so), which is neither the proof's time nor
    part of its timeout. Returns the versions (Yosys, Boolector) and the outcome's warm-up
    fields."""
    warm = time.perf_counter()
    (yosys_version, yosys_new), (solver_version, solver_new) = \
        warm_up(yosys, progress), warm_up(boolector, progress)
    tools = {"warmup_seconds": time.perf_counter() - warm,
             "compiled": tuple(name for name, new in (("Yosys", yosys_new),
                                                      ("Boolector", solver_new)) if new)}
    return (yosys_version, solver_version), tools


def _uncovered(component):
    """Why the method does not cover this design, or None (each reason is listed in the
    README's "Forms the proof does not cover")."""
    return None


class _Proof:
    """One netlist's proof: the plan, the netlist's export, the solver, and the clock the
    timeout runs on."""

    def __init__(self, plan, model, smt2, port_rows, boolector, folder, *, started, timeout_s,
                 versions, tools, progress):
        self.plan, self.model, self.smt2 = plan, model, smt2
        self.boolector, self.folder, self.progress = boolector, folder, progress
        self.started, self.timeout_s = started, timeout_s
        self.versions, self.tools = versions, tools
        self.quick_search = None
        self.query_type = LearningQuery if getattr(plan, "learning", None) else Query
        self.held = {}      # flops that only load a constant: name -> it (lemmas_of)
        widest = max([signed_bits(v.lo, v.hi) for v in plan.values.values()]
                     + wire_widths(smt2) + [1])
        self.width = max(MIN_WIDTH, widest + 2)
        # The query reads the logical ports; a member of a packed port (AXI4-Stream TDATA)
        # is a slice of it.
        self.ports = port_names(getattr(port_rows, "logical", port_rows))
        self.slices = [(next(p.name for p in port_rows.logical if p.internal == member),
                        port, lane.offset, lane.width)
                       for member, (port, lane) in getattr(port_rows, "lanes", {}).items()]

    def export(self, ignored=frozenset()):
        """The netlist's export, its packed ports' members readable by name."""
        smt = SmtExport(self.smt2, self.model.module, ignored)
        for name, port, offset, width in self.slices:
            smt.add_slice(name, port, offset, width)
        return smt

    def outcome(self, status, detail, lemmas=0, failing=(), candidate=None):
        return ProofOutcome(status, detail, lemmas, tuple(failing), candidate,
                            self.versions[1], self.versions[0],
                            time.perf_counter() - self.started, self.width, **self.tools)

    def _say(self, text):
        if self.progress is not None:
            self.progress(text)

    def run(self):
        """Rounds of lemmas until they hold, time runs out, or only wires that must follow
        the plan fail; then the search for a counterexample."""
        port_wires = {name for name, _ in self.ports.values()}
        ignored = set()
        while True:
            result = self._round(ignored)
            if isinstance(result, ProofOutcome):
                return result
            smt, lemmas, failing, skipped = result
            inner = {lemma for lemma in failing if smt.has(lemma)
                     and lemma not in port_wires and lemma not in smt.registers}
            # A flop taken to hold its constant that does not: no longer taken so.
            dropped = {name for name, constant in self.held.items()
                       if f"{name} holds {constant}" in failing}
            self.held = {name: k for name, k in self.held.items() if name not in dropped}
            if not inner and not dropped:
                break
            if not inner:
                continue
            # Inner wires that fail may just mean something else (a netlist written
            # back by synthesis keeps some of the names, partly driven). Compute them from
            # their operands instead and try again; the wires that hold stay cut points.
            ignored |= inner
            self._say(f"{len(inner)} inner wire(s) do not follow the plan; trying without")
        if self.quick_search is not None and self.quick_search() is not None:
            return self.outcome("counterexample", "lemma(s) fail: " + ", ".join(failing[:5])
                                + skipped, len(lemmas), failing)
        left = self.started + self.timeout_s - time.perf_counter()
        candidate = find_counterexample(self.plan, self.export(),
                                        self.width, self.ports, self.model, self.folder,
                                        self.boolector, max(5, left))
        return self.outcome("counterexample", "lemma(s) fail: " + ", ".join(failing[:5])
                            + skipped, len(lemmas), failing, candidate)

    def run_serial(self, component):
        """The serial design's lemmas (:mod:`.serial`), with the write port's when the weights
        are loadable, in one round; a failing lemma is a counterexample only once the
        simulation search shows a mismatch."""
        smt, plan = self.export(), self.plan
        query = Query(plan, smt, self.width, self.ports)
        try:
            lemmas, assumptions = serial_lemmas(component, self.model, smt, self.ports,
                                                self.width)
            if plan.loadable and "weight_write" in self.ports:
                lemmas += weight_write_lemmas(plan, query, self.model)
        except Undecided as why:
            return self.outcome("undecided", str(why))
        states = ["s0", "s1"]
        base = [smt.text, *smt.steps(states), *query.lines,
                *(f"(assert {a})" for a in assumptions)]
        common = base + enable_high(plan, smt, self.ports, states)
        vacuous = self._vacuous(common, "the assumptions")
        if vacuous is not None:
            return vacuous
        groups = [("\n".join(common), lemmas)]
        held = held_cycle(plan, smt, self.ports)
        if held is not None:
            held_assumptions, lemma = held
            lemmas = lemmas + [lemma]
            groups.append(("\n".join(base + held_assumptions), [lemma]))
        answer, failing = self._solve(lemmas, groups)
        if answer == "unsat":
            covered = "every code the input port can carry" if \
                component.config.guard.clamp else "every input in the declared ranges"
            return self.outcome("proved", f"all {len(lemmas)} lemmas hold for {covered}, beat "
                                f"by beat", len(lemmas))
        if answer == "unknown":
            return self.outcome("undecided", f"no answer within {self.timeout_s} s",
                                len(lemmas), failing)
        detail = "lemma(s) fail: " + ", ".join(failing[:5])
        if self.quick_search is not None and self.quick_search() is not None:
            return self.outcome("counterexample", detail, len(lemmas), failing)
        return self.outcome("undecided", detail + "; no simulation found a mismatch",
                            len(lemmas), failing)

    def _vacuous(self, common, what):
        """Undecided when nothing satisfies the assumptions (a proof under them would prove
        anything), else None."""
        alone, _ = solve(self.boolector, "\n".join(common), self.folder, "assumptions.smt2",
                         max(1, self.started + self.timeout_s - time.perf_counter()))
        if alone == "sat":
            return None
        return self.outcome("undecided", f"{what} cannot all hold on this netlist"
                            if alone == "unsat" else f"no answer within {self.timeout_s} s")

    def _solve(self, lemmas, groups):
        """Every group's lemmas, in batches: 'unsat' (all hold), 'sat' or 'unknown', and the
        failing labels."""
        self._say(f"solving {len(lemmas)} lemmas with Boolector")
        products = {name for name, value in self.plan.values.items() if value.kind == "mul"}
        answers = [solve_batches(self.boolector, text, group, self.folder,
                                 self.started + self.timeout_s, products)
                   for text, group in groups if group]
        failing = [lemma for _, found in answers for lemma in found]
        kinds = {answer for answer, _ in answers}
        return ("sat" if "sat" in kinds else "unknown" if "unknown" in kinds else "unsat"),\
            failing

    def _round(self, ignored):
        """One round with the ``ignored`` wires computed from their operands: a final
        outcome, or what failed (the export, the lemmas, the failing labels, a note)."""
        plan, timeout_s = self.plan, self.timeout_s
        smt = self.export(frozenset(ignored))
        query = self.query_type(plan, smt, self.width, self.ports)
        # A cut wire must hold its whole range, so that its free value can be assumed in it.
        smt.cut({name for name in plan.closed
                 if smt.has(name) and query.holds_exactly(name, name)})
        try:
            lemmas, assumptions, inputs = lemmas_of(plan, query, self.model, self.held)
        except Undecided as why:
            return self.outcome("undecided", str(why))
        common, groups = self._queries(smt, query, lemmas, assumptions, inputs)
        if not ignored:
            vacuous = self._vacuous(common, "the assumptions (inputs in their ranges)")
            if vacuous is not None:
                return vacuous
        answer, failing = self._solve(lemmas, groups)
        skipped = (f"; {len(ignored)} inner wire(s) that do not follow the plan, such as "
                   f"{', '.join(sorted(ignored)[:3])}, were computed from their operands "
                   f"instead") if ignored else ""
        if answer == "unsat":
            covered = "every code the input ports can carry" if plan.guard.clamp else \
                "every input in the declared ranges"
            return self.outcome("proved", f"all {len(lemmas)} lemmas hold for {covered}"
                                f"{skipped}", len(lemmas))
        if answer == "unknown":
            return self.outcome("undecided", f"no answer within {timeout_s} s{skipped}",
                                len(lemmas), failing)
        return smt, lemmas, failing, skipped

    def _queries(self, smt, query, lemmas, assumptions, inputs):
        """The text every query shares (inputs in range included), and the lemma groups with
        the text each is checked under."""
        plan, ports = self.plan, self.ports
        states = ["s0", "s1"] if plan.latency else ["s0"]
        base = [smt.text, *smt.steps(states), *query.lines]
        base += [f"(assert {a})" for a in assumptions]
        common = base + enable_high(plan, smt, ports, states)
        # With the flag alone (no clamp), results are stated for inputs in range only,
        # but the flag for every code: its lemmas are checked without the input ranges.
        flags = [name for name, value in plan.values.items() if value.kind == "flag"]
        flag_labels = set(flags) | ({ports["out_of_range"][0]} if "out_of_range" in ports
                                    else set())
        flag_labels |= {register_name(name, k) for name in flags
                        for k in range(1, plan.latency + 1)}
        free = [l for l in lemmas if l[0] in flag_labels]
        groups = [("\n".join(common + [f"(assert {a})" for a in inputs]),
                   [l for l in lemmas if l not in free]), ("\n".join(common), free)]
        held = held_cycle(plan, smt, ports)
        if held is not None:
            # The held cycle: the enable low instead of high, any input.
            held_assumptions, lemma = held
            lemmas.append(lemma)
            groups.append(("\n".join(base + held_assumptions), [lemma]))
        common += [f"(assert {a})" for a in inputs]
        return common, groups
