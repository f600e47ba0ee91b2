"""Emitters: ports, the netlist, and the Verilog and VHDL writers."""

from .core_file import (VERILOG_2001, VHDL_2008, HdlFile, core_file_name, core_file_text,
                        core_name)
from .ports import Port, PortTable, check_ports, read_netlist, verilog_ports
from .netlist import netlist_of
from .verilog import bit_range, emit_verilog, instance_template, port_table, range_comments
from .vhdl import check_vhdl_names, component_package, emit_vhdl, vhdl_comments

__all__ = ["VERILOG_2001", "VHDL_2008", "HdlFile", "core_file_name", "core_file_text",
           "core_name", "Port", "PortTable", "check_ports", "read_netlist", "verilog_ports",
           "bit_range", "emit_verilog", "instance_template", "port_table", "range_comments",
           "netlist_of", "emit_vhdl", "check_vhdl_names", "component_package", "vhdl_comments"]
