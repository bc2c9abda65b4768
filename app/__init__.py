"""ringwise: a design sheet for discrete transistor LC oscillators of the Colpitts family."""

__version__ = "0.1.0"
