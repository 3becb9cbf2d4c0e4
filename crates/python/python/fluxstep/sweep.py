"""Sweeps over operating points, tolerance corners and Monte Carlo samples:
``Sweep(spec, circuit=None).run()`` returns a ``Table`` whose ``columns``
go straight into ``pandas.DataFrame``."""

from ._fluxstep import Sweep, Table

__all__ = ["Sweep", "Table"]
