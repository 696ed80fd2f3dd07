"""sicheck: signal-integrity rule checker for printed-circuit-board trace lists."""

__version__ = "0.1.0"
