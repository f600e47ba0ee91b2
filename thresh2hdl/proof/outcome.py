"""What a proof answers (:class:`ProofOutcome`), and the exception for a netlist the method
cannot decide."""

from dataclasses import dataclass

__all__ = ["ProofOutcome", "DEFAULT_TIMEOUT_S", "Undecided"]

DEFAULT_TIMEOUT_S = 300


@dataclass(frozen=True)
class ProofOutcome:
    """What the solver answered.

    ``status`` is ``"proved"``, ``"counterexample"`` or ``"undecided"`` (timeout, or a netlist
    the method cannot read; ``detail`` says which). A counterexample here is the solver's: a
    lemma fails (``failing`` names them), and ``candidate`` is an input vector whose outputs the
    solver says differ from the model's, or None when its search found none. It counts as one
    only once a simulator confirms it: the application re-runs it and records ``undecided``
    until then.

    ``seconds`` is the proof's time; ``warmup_seconds`` the tools' first calls before it (a
    WebAssembly build compiles on its first call on a machine: ``compiled`` names those that
    did).
    """

    status: str
    detail: str
    lemmas: int
    failing: tuple
    candidate: tuple | None
    solver: str
    yosys: str
    seconds: float
    width_bits: int
    warmup_seconds: float = 0.0
    compiled: tuple = ()


class Undecided(Exception):
    """The netlist is outside what the method covers; the message says how."""
