"""A build folder read back: its model, report and recorded settings, and the design rebuilt
from them, for check, prove and estimate."""

from dataclasses import dataclass
from pathlib import Path

from ..errors import InputError
from ..hardware import UnitConfig, plan_design
from ..model import Model, load_model
from ..readers import shorten
from ..reports import report_html, report_json, report_markdown, report_record
from .settings import (SETTINGS_FILE, BuildSettings, read_build_settings, read_report,
                       read_settings)

__all__ = ["BuildFolder", "load_folder", "report_files"]


@dataclass(frozen=True)
class BuildFolder:
    """A build folder as check, prove and estimate see it. ``report`` is report.json's data,
    which prove and estimate update and write back (:func:`report_files`)."""

    path: Path
    model: Model
    report: dict
    settings: BuildSettings
    component: object          # the design rebuilt from ``settings``
    verilog: Path | None       # the folder's own Verilog file (None: a VHDL-only build)
    vhdl: Path | None = None   # the folder's own VHDL file (``--hdl vhdl`` or ``both``)

    @property
    def design(self):
        """The folder's own design file that check, prove and estimate take: the Verilog, or
        the VHDL of a VHDL-only build."""
        return self.verilog or self.vhdl


def load_folder(out_dir):
    """The build folder ``out_dir`` read back and its design rebuilt: from its settings record
    (:data:`~thresh2hdl.app.settings.SETTINGS_FILE`), or from the report's keys in a folder
    built before the record was written. Anything refused is one InputError naming the file."""
    out_dir = Path(out_dir)
    if not out_dir.is_dir():
        raise InputError("is not a build folder", source=out_dir)
    model = load_model(out_dir / "model.toml")
    record = out_dir / SETTINGS_FILE
    if record.exists():
        source, settings = record, read_settings(record)
        report = read_report(out_dir / "report.json")
        if settings.module != model.module:
            raise InputError(f"must be model.toml's module {model.module!r}, not "
                             f"{shorten(settings.module)!r}; rebuild the folder", source=record,
                             field="module")
        verilog = f"{settings.module}.v"
    else:
        source = out_dir / "report.json"
        report, config, latency = read_build_settings(source)
        settings = BuildSettings(module=model.module, latency_cycles=latency, **config)
        verilog = report["verilog"]
    report_files(out_dir, report)     # a report edited past showing is refused now, not later
    try:
        component = plan_design(UnitConfig(model, **settings.unit_config()))
    except InputError as error:
        raise InputError(f"the recorded build settings are refused ({error}); rebuild the "
                         f"folder", source=source) from None
    if settings.latency_cycles != component.latency:
        # A folder written by a version that timed the design otherwise (split adders were
        # two parts before they were N-bit parts): its file would be judged at the wrong cycle.
        raise InputError(f"latency_cycles is {settings.latency_cycles}, but this version builds "
                         f"these settings with a latency of {component.latency}; rebuild the "
                         f"folder", source=source)
    hdl = report.get("hdl", "verilog")
    if hdl not in ("verilog", "vhdl", "both"):
        raise InputError(f"must be verilog, vhdl or both, not {shorten(str(hdl))!r}; rebuild "
                         f"the folder", source=out_dir / "report.json", field="hdl")
    return BuildFolder(out_dir, model, report, settings, component,
                       None if hdl == "vhdl" else out_dir / verilog,
                       None if hdl == "verilog" else out_dir / f"{model.module}.vhd")


def report_files(out_dir, report):
    """The report files of a folder from its (updated) report data, ready for write_files; a
    report.json edited into something the formats cannot show is one InputError (naming the
    field) from reading it into the report record."""
    record = report_record(report, source=out_dir / "report.json")
    return {out_dir / "report.json": report_json(report),
            out_dir / "report.html": report_html(record),
            out_dir / "report.md": report_markdown(record)}
