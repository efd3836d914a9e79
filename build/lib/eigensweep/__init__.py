"""eigensweep: cached, reproducible variational-eigensolver sweeps for molecules."""

__version__ = "0.1.0"
