"""Emitters: ports, the netlist, and the Verilog writer."""

from .core_file import (VERILOG_2001, VHDL_2008, HdlFile, core_file_name, core_file_text,
                        core_name)
from .ports import Port, read_netlist, verilog_ports
from .verilog import bit_range, emit_verilog, instance_template, port_table, range_comments

__all__ = ["VERILOG_2001", "VHDL_2008", "HdlFile", "core_file_name", "core_file_text",
           "core_name", "Port", "read_netlist", "verilog_ports", "bit_range", "emit_verilog",
           "instance_template", "port_table", "range_comments"]
