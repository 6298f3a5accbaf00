"""Assembly, solving and derived results over the netlist."""
