"""HDL-side harnesses and testbench templates, shipped inside the package as thresh2hdl.sim."""
