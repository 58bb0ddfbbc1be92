"""simkit: design and check the high-voltage DC supply of vacuum-tube equipment with ngspice."""

__version__ = "0.1.0"
