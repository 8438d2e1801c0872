"""bandwright: plans and audits multi-stage active bandpass filter chains.

Entry points: ``load_spec(path)`` → Requirement, ``plan(requirement)`` → Plan.
"""

__version__ = "0.1.0"

from bandwright.inputs import load_spec  # noqa: E402
from bandwright.planner import plan  # noqa: E402

__all__ = ["__version__", "load_spec", "plan"]
