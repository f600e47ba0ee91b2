"""The proof's view of the reset and the clock enable: the reset as a Bool at its port's level
(an active-low port ``rst_n`` asserts it low), when it clears the valid bits (an asynchronous
one also in the cycle it is asserted: the export reads it through Yosys's ``async2sync``), and
the clock enable.

The datapath is proved with the enable held high. A held cycle is then a claim of its own,
checked as one more lemma: from any state, with the enable low and the reset released, no
register changes and ``in_ready`` and ``out_valid`` read 0. By induction over the cycles the
design's outputs are then those of the same design with the held cycles removed, which the
other lemmas cover.
"""

from ..hardware import reset_is_async
from .query import bool_signal

__all__ = ["reset_asserted", "reset_clears", "enable_high", "held_cycle", "HOLD_LEMMA"]

HOLD_LEMMA = "clock_enable_holds"


def reset_asserted(smt, ports, state):
    """The reset as a Bool, true while asserted at its port's level."""
    if "rst_n" in ports:
        return f"(not {bool_signal(smt, ports['rst_n'][0], state)})"
    return bool_signal(smt, ports["rst"][0], state)


def reset_clears(plan, smt, ports):
    """When the valid bits read 0 in state ``s1``: a reset in ``s0``, and an asynchronous
    one in ``s1`` as well."""
    now = reset_asserted(smt, ports, "s0")
    if not reset_is_async(plan.reset):
        return now
    return f"(or {now} {reset_asserted(smt, ports, 's1')})"


def enable_high(plan, smt, ports, states):
    """Assumptions: the clock enable high in every state (none without an enable)."""
    if not plan.clock_enable:
        return []
    return [f"(assert {bool_signal(smt, ports['ce'][0], s)})" for s in states]


def held_cycle(plan, smt, ports):
    """The held cycle's assumptions (enable low in ``s0``, the reset released in ``s0`` and
    ``s1``) and its lemma (every register keeps its value into ``s1``; ``in_ready`` and
    ``out_valid`` are 0 in ``s0``); None without an enable."""
    if not plan.clock_enable:
        return None
    assumptions = [f"(assert (not {bool_signal(smt, ports['ce'][0], 's0')}))"]
    assumptions += [f"(assert (not {reset_asserted(smt, ports, s)}))" for s in ("s0", "s1")]
    kept = [f"(= {smt.bits(name, 's1')} {smt.bits(name, 's0')})"
            for name in sorted(smt.registers)]
    quiet = [f"(not {bool_signal(smt, ports[port][0], 's0')})"
             for port in ("in_ready", "out_valid")]
    return assumptions, (HOLD_LEMMA, f"(and true {' '.join(kept + quiet)})")
