"""thresh2hdl: trained threshold units to sized, verified, synthesizable Verilog.

Library first: everything the command line does is one of these calls.

>>> import thresh2hdl
>>> model = thresh2hdl.demo_model()
>>> analysis = thresh2hdl.analyse(model)
>>> analysis.score_bits == analysis.score_bits_min
True
"""

__version__ = "0.1.0"

from .errors import InputError, MismatchError, ThreshError, ToolError, UndecidedError
from .model import FeatureFormat, Model, PortNames, Unit, load_model, model_to_toml, parse_model
from .analysis import Analysis, analyse, signed_bits
from .verify import ReferenceModel, cycle_model, make_stimulus, make_vectors, simulate_amaranth
from .hardware import ThresholdUnit, UnitConfig
from .emit import emit_verilog, instance_template
from .app import (BuildOptions, BuildResult, CheckResult, ProofResult, build, check, demo_model,
                  estimate_folder, explore, ExploreResult, prove)
from .explore import Constraints, Grid
from .proof import ProofOutcome, prove_netlist

__all__ = ["__version__", "InputError", "MismatchError", "ThreshError", "ToolError",
           "UndecidedError",
           "FeatureFormat", "Model", "PortNames", "Unit", "load_model", "model_to_toml",
           "parse_model", "Analysis", "analyse", "signed_bits", "ReferenceModel", "cycle_model",
           "ThresholdUnit", "UnitConfig", "emit_verilog", "instance_template", "make_vectors",
           "make_stimulus", "simulate_amaranth", "BuildOptions", "BuildResult", "build",
           "demo_model", "check", "CheckResult", "estimate_folder", "explore", "ExploreResult",
           "Grid", "Constraints", "prove", "ProofResult",
           "prove_netlist", "ProofOutcome"]
