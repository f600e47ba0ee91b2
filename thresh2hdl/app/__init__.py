"""The application layer: build, check, prove, estimate, fit, and the command line."""

from .flow import (BuildOptions, BuildResult, CheckResult, ProofResult, build, check, demo_model,
                   estimate_folder, prove)

__all__ = ["BuildOptions", "BuildResult", "CheckResult", "ProofResult", "build", "check",
           "demo_model", "estimate_folder", "prove"]
