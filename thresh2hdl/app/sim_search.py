"""The counterexample search by simulation, for a netlist the proof's method cannot follow.

A netlist whose register is narrower than the plan, or whose valid bit rises a cycle early,
has no structure for the per-value lemmas to hold on to, so the proof answers "undecided";
yet such a design is wrong at once in simulation. Before "undecided" stands, the whole design
runs in a Verilog simulator on the build's own kinds of vectors (corners, a bank's ties and
winners, the decision threshold, random vectors with handshake gaps and stalls), its outputs
and handshake judged cycle by cycle against the model: a mismatch is a counterexample found
and confirmed by the simulator; none leaves the answer undecided.
"""

import numpy as np

from ..verify import first_stimulus, make_backend, make_vectors

__all__ = ["SEARCH_VECTORS", "search_by_simulation"]

SEARCH_VECTORS = 2000       # random vectors beside the corners, ties and threshold vectors


def _item_at(stimulus, cycle, beats):
    """The input vector most recently accepted at ``cycle`` (the item a handshake error
    concerns), or None before the first."""
    accepted = np.asarray(stimulus.in_valid) & np.asarray(stimulus.expect_in_ready)
    count = int(np.count_nonzero(accepted[: cycle + 1]))
    return (count - 1) // beats if count else None


def search_by_simulation(simulator, component, text, ports, model, *, seed=0):
    """The first mismatch of the Verilog ``text`` in ``simulator`` (``icarus`` or
    ``verilator``): ``(vector or None, mismatch text, simulator version)``, or None when every
    cycle agrees."""
    analyses = component.unit_analyses
    vectors = make_vectors(analyses[0], random_count=SEARCH_VECTORS, seed=seed,
                           others=analyses[1:], guard=component.config.guard)
    stimulus, _ = first_stimulus(component, model, vectors.array, seed=seed, reload_count=100)
    backend = make_backend(simulator, verilog_text=text, ports=ports, module=model.module)
    checked = backend.run(stimulus).check(stimulus)
    if not checked.mismatches:
        return None
    first = checked.mismatches[0]
    index = first.vector_index
    if index is None or index < 0:
        index = _item_at(stimulus, first.cycle, component.beats)
    vector = None if index is None else [int(v) for v in stimulus.vectors[index]]
    names = [f.name for f in model.features]
    return vector, first.describe(stimulus, names), backend.version()
