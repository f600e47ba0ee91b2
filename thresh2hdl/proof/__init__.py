"""The proof that a netlist makes the reference model's decisions."""

from .outcome import DEFAULT_TIMEOUT_S, ProofOutcome
from .gate_level import GATE_METHOD, gate_netlist, prove_gate_netlist
from .prover import proof_tools, prove_netlist

__all__ = ["DEFAULT_TIMEOUT_S", "GATE_METHOD", "ProofOutcome", "gate_netlist", "proof_tools",
           "prove_gate_netlist", "prove_netlist"]
