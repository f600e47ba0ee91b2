"""The application layer: build, check, prove, estimate, fit, and the command line.

One concern a module: ``options`` (BuildOptions, each option declared once), ``progress`` (the
one progress interface), ``building`` (build), ``settings`` (the settings record a build
writes, and an older folder's report keys), ``folder`` (a build folder read back),
``checking``, ``proving``, ``estimating`` (what is done to a folder), ``fit``, ``exploring``
(a grid of designs, its tasks in ``explore_point``, its options in ``explore_command``) and
``cli``.
"""

from .building import BuildResult, build, demo_model
from .checking import CheckResult, check
from .estimating import estimate_folder
from .exploring import ExploreResult, explore
from .options import BuildOptions
from .progress import Progress
from .proving import ProofResult, prove
from .settings import BuildSettings

__all__ = ["BuildOptions", "BuildResult", "BuildSettings", "CheckResult", "Progress",
           "ProofResult", "build", "check", "demo_model", "estimate_folder", "explore",
           "ExploreResult", "prove"]
