"""Emitters: ports, the netlist, and the Verilog writer."""

from .ports import Port, PortTable, read_netlist, verilog_ports
from .verilog import bit_range, emit_verilog, instance_template, port_table, range_comments

__all__ = ["Port", "PortTable", "read_netlist", "verilog_ports", "bit_range", "emit_verilog",
           "instance_template", "port_table", "range_comments"]
