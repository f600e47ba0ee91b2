"""The simulation templates (the top-level ``sim/`` folder), from an install or a checkout.

An install ships ``sim/`` inside the package as ``thresh2hdl.sim``. Run from a source checkout
(its folder first on ``sys.path``: ``python -c`` or a script there, ``PYTHONPATH``), Python
imports ``thresh2hdl`` from the checkout, which has no ``thresh2hdl/sim``, and any installed
copy stays hidden; there the templates are the checkout's ``sim/`` beside the package.
"""

from importlib import resources
from pathlib import Path

from ..errors import ToolError

__all__ = ["template_text"]


def template_text(name):
    """The text of the template ``name`` (``thresh_tb.v.in``, ``verilator_harness.cpp.in``)."""
    try:
        return resources.files("thresh2hdl.sim").joinpath(name).read_text("utf-8")
    except (ModuleNotFoundError, FileNotFoundError):
        pass
    beside = Path(__file__).resolve().parents[2] / "sim" / name
    try:
        return beside.read_text(encoding="utf-8")
    except OSError:
        raise ToolError(f"the simulation template {name} is missing from this installation; "
                        f"install thresh2hdl again (pip install .)") from None
