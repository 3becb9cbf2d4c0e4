"""Periodic steady state by shooting, with its stability (Floquet
multipliers): ``find(circuit, options=None)`` returns a ``SteadyState``."""

from ._fluxstep import SteadyOptions, SteadyState
from ._fluxstep import find as find

__all__ = ["SteadyOptions", "SteadyState", "find"]
