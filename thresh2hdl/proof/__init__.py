"""The proof that a netlist makes the reference model's decisions."""

from .outcome import DEFAULT_TIMEOUT_S, ProofOutcome
from .prover import proof_tools, prove_netlist

__all__ = ["DEFAULT_TIMEOUT_S", "ProofOutcome", "proof_tools", "prove_netlist"]
