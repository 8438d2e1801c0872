"""bandwright: plans and audits multi-stage active bandpass filter chains."""

__version__ = "0.1.0"
__all__ = ["__version__"]
