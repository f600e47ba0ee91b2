"""A FuseSoC CAPI2 core description of an output folder, so that a project's package manager
can take the module and run its testbench.

The text names files relative to the core file (FuseSoC resolves them from the folder it
sits in) and carries no paths or timestamps. Its shape follows the CAPI2 schema of FuseSoC
2.4 (``fusesoc/capi2/json_schema.py``) and Edalize's ``sim`` flow: a ``default`` target with
the design alone (what a core that depends on this one gets) and a ``sim`` target that runs
the self-checking testbench. The testbench reads its vector files with ``$readmemh`` from the
simulator's work directory, so they are ``user`` files with ``copyto``, which FuseSoC copies
there.
"""

import json
from typing import NamedTuple

__all__ = ["HdlFile", "VERILOG_2001", "VHDL_2008", "SIMULATOR_OPTIONS", "core_file_name",
           "core_name", "core_file_text"]

# File types of the IP-XACT list that FuseSoC and Edalize read.
VERILOG_2001 = "verilogSource-2001"
VHDL_2008 = "vhdlSource-2008"

# Edalize flow options of each simulator a ``sim`` target may name; the values are the
# options the project's own runs use (sim_icarus: ``iverilog -g2001 -Wall``).
SIMULATOR_OPTIONS = {
    "icarus": {"iverilog_options": ["-g2001", "-Wall"]},
    "ghdl": {"analyze_options": ["--std=08"]},
}

CORE_VENDOR, CORE_LIBRARY = "thresh2hdl", "generated"


class HdlFile(NamedTuple):
    """One source file of the folder: its name and its CAPI2 file type."""

    name: str
    file_type: str


def core_file_name(module):
    return f"{module}.core"


def core_name(module, version):
    """The core's VLNV (vendor:library:name:version)."""
    return f"{CORE_VENDOR}:{CORE_LIBRARY}:{module}:{version}"


def _quoted(text):
    # A JSON string is a YAML double-quoted scalar: no character can end it early, and a name
    # such as `on` or `null` stays a string (plain, YAML 1.1 reads them as true and None).
    return json.dumps(str(text))


def _files(files):
    """A fileset's ``files`` list, each entry with its own file type."""
    return [f"      - {_quoted(item.name)}: {{file_type: {item.file_type}}}" for item in files]


def core_file_text(module, *, version, design, testbench, data, testbench_top=None,
                   simulator="icarus", description="", vhdl=None):
    """The ``.core`` text for ``module``.

    ``design`` and ``testbench``: :class:`HdlFile` rows, in compile order (Verilog and VHDL
    alike, so a folder with both languages lists both); ``data``: names of the files the
    testbench reads from its work directory; ``testbench_top``: the testbench's top module
    (``{module}_tb`` unless given); ``simulator``: a key of :data:`SIMULATOR_OPTIONS`;
    ``vhdl``: ``(design, testbench)`` of a folder that has the VHDL too, as targets ``vhdl``
    (the design) and ``sim_vhdl`` (its testbench in GHDL) beside the Verilog's.
    """
    if not design or not testbench:
        raise ValueError("a core needs at least one design file and one testbench file")
    if simulator not in SIMULATOR_OPTIONS:
        raise ValueError(f"no core-file options for the simulator {simulator!r}; known: "
                         f"{', '.join(sorted(SIMULATOR_OPTIONS))}")
    top = testbench_top or f"{module}_tb"
    lines = ["CAPI=2:", "", f"name: {core_name(module, version)}"]
    if description:
        lines.append(f"description: {_quoted(description)}")
    lines += ["", "filesets:", "  rtl:", "    files:", *_files(design),
              "  testbench:", "    files:", *_files(testbench)]
    if vhdl:
        lines += ["  rtl_vhdl:", "    files:", *_files(vhdl[0]),
                  "  testbench_vhdl:", "    files:", *_files(vhdl[1])]
    if data:
        lines += ["  vectors:", "    files:",
                  *[f"      - {_quoted(name)}: {{file_type: user, copyto: {_quoted(name)}}}"
                    for name in data]]
    sim_sets = ["rtl", "testbench"] + (["vectors"] if data else [])
    lines += ["", "targets:",
              "  default:",
              "    filesets: [rtl]",
              f"    toplevel: {_quoted(module)}",
              "  sim:",
              "    description: \"The self-checking testbench: prints PASS or FAIL\"",
              f"    filesets: [{', '.join(sim_sets)}]",
              f"    toplevel: {_quoted(top)}",
              "    flow: sim",
              "    flow_options:",
              f"      tool: {simulator}"]
    lines += _options(simulator)
    if vhdl:
        vhdl_sets = ["rtl_vhdl", "testbench_vhdl"] + (["vectors"] if data else [])
        lines += ["  vhdl:", "    filesets: [rtl_vhdl]", f"    toplevel: {_quoted(module)}",
                  "  sim_vhdl:",
                  "    description: \"The VHDL self-checking testbench: prints PASS or FAIL\"",
                  f"    filesets: [{', '.join(vhdl_sets)}]", f"    toplevel: {_quoted(top)}",
                  "    flow: sim", "    flow_options:", "      tool: ghdl", *_options("ghdl")]
    return "\n".join(lines) + "\n"


def _options(simulator):
    return [f"      {option}: [{', '.join(_quoted(v) for v in values)}]"
            for option, values in SIMULATOR_OPTIONS[simulator].items()]
