"""Verification: the integer reference, vectors, stimulus, one back end per simulator."""

from .backend import SimulationResult, SimulatorBackend
from .cocotb_module import COCOTB_SIMULATORS, cocotb_file_name, cocotb_test_text
from .compare import CompareResult, Mismatch, compare
from .reference import ReferenceModel, cycle_model
from .runner import (CHUNK_VECTORS, Verification, choose_simulator, chunk_vectors,
                     first_stimulus, make_backend, verify)
from .sim_amaranth import AmaranthBackend, simulate_amaranth
from .sim_ghdl import (GhdlBackend, ghdl_lint, ghdl_reading, ghdl_version,
                       write_vhdl_testbench)
from .sim_icarus import (IcarusBackend, TestbenchFiles, icarus_version, simulate_icarus,
                         write_testbench)
from .sim_verilator import (VerilatorBackend, find_verilator, simulate_verilator,
                            verilator_version)
from .stimulus import make_reload_stimulus, make_stimulus, with_held_cycles
from .vectors import RANDOM_GROUP, make_vectors, random_vectors, reload_sets

__all__ = ["SimulationResult", "SimulatorBackend", "COCOTB_SIMULATORS", "cocotb_file_name",
           "cocotb_test_text", "CompareResult", "Mismatch", "compare",
           "ReferenceModel", "cycle_model", "CHUNK_VECTORS", "Verification",
           "choose_simulator", "chunk_vectors", "first_stimulus", "make_backend", "verify",
           "AmaranthBackend", "simulate_amaranth", "IcarusBackend", "TestbenchFiles",
           "icarus_version", "simulate_icarus", "write_testbench", "VerilatorBackend",
           "find_verilator", "simulate_verilator", "verilator_version", "make_reload_stimulus",
           "make_stimulus", "with_held_cycles", "RANDOM_GROUP", "make_vectors",
           "random_vectors", "reload_sets", "GhdlBackend", "ghdl_lint", "ghdl_reading",
           "ghdl_version", "write_vhdl_testbench"]
