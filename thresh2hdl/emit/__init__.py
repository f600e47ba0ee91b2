"""Emitters: ports, the netlist, and the Verilog writer."""

from .verilog import emit_verilog, instance_template, port_table, range_comments

__all__ = ["emit_verilog", "instance_template", "port_table", "range_comments"]
