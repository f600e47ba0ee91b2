"""Verification: the integer reference, vectors, stimulus, one back end per simulator."""

from .reference import ReferenceModel, cycle_model
from .runner import (CHUNK_VECTORS, Verification, choose_simulator, chunk_vectors,
                     first_stimulus, run_simulator, verify)
from .sim_amaranth import simulate_amaranth
from .sim_icarus import TestbenchFiles, icarus_version, simulate_icarus, write_testbench
from .sim_verilator import find_verilator, simulate_verilator, verilator_version
from .stimulus import make_reload_stimulus, make_stimulus
from .vectors import RANDOM_GROUP, make_vectors, random_vectors, reload_sets

__all__ = ["CHUNK_VECTORS", "Verification", "choose_simulator", "chunk_vectors",
           "first_stimulus", "run_simulator", "verify", "ReferenceModel", "cycle_model", "simulate_amaranth", "TestbenchFiles", "icarus_version",
           "simulate_icarus", "write_testbench", "find_verilator", "simulate_verilator",
           "verilator_version", "make_reload_stimulus", "make_stimulus", "RANDOM_GROUP",
           "make_vectors", "random_vectors", "reload_sets"]
