"""The proof that a netlist makes the reference model's decisions."""

from .prover import DEFAULT_TIMEOUT_S, ProofOutcome, prove_netlist

__all__ = ["DEFAULT_TIMEOUT_S", "ProofOutcome", "prove_netlist"]
