"""The search for a counterexample once a lemma fails: an input whose outputs, after the
pipeline latency with the sink ready, differ from the model's. A lemma that fails is not yet
one (the lemmas are stronger than the claim); the caller re-runs what this finds in a
simulator before calling it one."""

from ..names import weight_registers
from .clocking import enable_high, reset_asserted
from .outcome import Undecided
from .query import Query, bool_signal, bv
from .solve import solve

__all__ = ["find_counterexample"]


def _vector(values, keys, width):
    """The input vector of a solver model, or None if a value is missing."""
    vector = []
    for key in keys:
        bits = values.get(key)
        if bits is None:
            return None
        number = int(bits[2:], 2)
        vector.append(number - (1 << width) if number >= 1 << (width - 1) else number)
    return tuple(vector)


def _trained_weights(plan, query, model, states):
    """Loadable weights: the registers hold the trained values in every state, so that a
    simulator from reset replays the input found."""
    if not plan.loadable:
        return []
    return [f"(assert (= {query.weight_register(name, s)} {bv(value, query.width)}))"
            for name, value in weight_registers(model) for s in states]


def find_counterexample(plan, smt, width, ports, model, folder, boolector, timeout_s):
    """An input whose outputs, after the latency with the sink ready, differ from the model's."""
    latency = plan.latency
    states = [f"s{k}" for k in range(latency + 1)]
    query = Query(plan, smt, width, ports, pure=True)
    w = width
    lines = []
    try:
        xs = [query.code(i, "s0") for i in range(len(model.features))]
        ranges = query.input_ranges()
        in_range = f"(and true {' '.join(ranges)})" if ranges else "true"
        lines.append(f"(assert {bool_signal(smt, ports['in_valid'][0], 's0')})")
        for s in states:
            lines.append(f"(assert {bool_signal(smt, ports['out_ready'][0], s)})")
            if latency:
                lines.append(f"(assert (not {reset_asserted(smt, ports, s)}))")
        lines += enable_high(plan, smt, ports, states)
        lines += _trained_weights(plan, query, model, states)
        last = states[-1]
        # The reference bracketed like the plan: equal to w . x + b (see
        # forms.check_cover), and far easier for the solver to match against the netlist
        # than a plain sum.
        scores = [query.score(u, 0) for u in range(len(model.units))]
        if model.is_bank:
            best_index = query.known(plan.class_value, 0, w) if plan.class_value \
                else bv(0, w)
            expected = [("y", best_index)]
        else:
            expected = [("y", f"(ite (bvsgt {scores[0]} {bv(0, w)}) {bv(1, w)} {bv(0, w)})")]
        if model.ports.has_score:
            expected += [("score" if not model.is_bank else f"score{u}", s)
                         for u, s in enumerate(scores)]
        differs = []
        for internal, value in expected:
            port, signed = query.port(internal)
            differs.append(f"(distinct {query.wide(port, last, signed)} {value})")
        # The results are stated for inputs in range (every code, with the clamp); the
        # out-of-range flag for every code.
        wrong = f"(and {in_range} (or false {' '.join(differs)}))"
        if plan.guard.flag:
            port, _ = query.port("out_of_range")
            flag = f"(ite {query.outside('s0')} #b1 #b0)"
            wrong = f"(or {wrong} (distinct {smt.bits(port, last)} {flag}))"
        valid = bool_signal(smt, ports["out_valid"][0], last)
        lines.append(f"(assert (and {valid} {wrong}))")
    except Undecided:
        return None
    text = [smt.text, *smt.steps(states), *query.lines, *lines]
    answer, values = solve(boolector, "\n".join(text), folder, "search.smt2", timeout_s, xs)
    return _vector(values, xs, w) if answer == "sat" else None
