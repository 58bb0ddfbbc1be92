"""simkit.netlist"""
