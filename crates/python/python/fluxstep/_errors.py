"""The exceptions and warnings fluxstep raises.

Every exception derives from :class:`FluxstepError`; those about bad input
also derive from :class:`ValueError`, so code that already catches
``ValueError`` keeps working. Messages are the Rust library's own, word for
word, and name the element, node, field or time concerned.
"""

from __future__ import annotations


class FluxstepError(Exception):
    """Base class of every fluxstep exception."""


class CircuitError(FluxstepError, ValueError):
    """A circuit could not be read or breaks the circuit rules.

    ``problems`` lists every broken rule at once (one dict per problem with
    ``element``, ``field``, ``node`` and ``message``; empty for a JSON
    error), and ``path`` names where a malformed JSON document goes wrong
    (``elements[2].inductance`` or ``line L column C``; ``None`` otherwise).
    """

    problems: list[dict]
    path: str | None

    def __init__(self, message: str, problems=None, path=None):
        super().__init__(message)
        self.problems = list(problems or [])
        self.path = path


class OutputError(FluxstepError, ValueError):
    """An output name that the circuit does not have (the message lists
    every accepted form, or every output of the circuit)."""


class SimulationError(FluxstepError):
    """A simulation diagnostic: an interrupted inductor current, a short
    circuit, chatter, an event limit, a value that is not finite...

    ``time`` is the instant of the problem in seconds (``None`` where the
    diagnostic has none) and ``kind`` a short name of the diagnostic
    (``"inductor_interrupted"``, ``"short_circuit"``, ...). A run that stops
    on a diagnostic does not raise it: :func:`fluxstep.simulate` returns what
    was recorded with the diagnostic in ``Run.stopped``.
    """

    time: float | None
    kind: str

    def __init__(self, message: str, time=None, kind: str = "diagnostic"):
        super().__init__(message)
        self.time = time
        self.kind = kind


class MeasureError(FluxstepError, ValueError):
    """A measurement that cannot be taken: a window outside the record, an
    empty window, an output that floats inside it."""


class UnavailableValueError(FluxstepError, ValueError):
    """An output has no value at an instant (outside the recorded window,
    or undetermined because it floats). Raised only by the strict forms
    of evaluation; the vectorised default returns NaN there."""


class AnalysisError(FluxstepError):
    """A steady-state, response or loop-gain analysis failed.

    ``kind`` says how (``"not_converged"``, ``"unstable"``, ``"no_period"``,
    ``"incommensurate"``, ``"invalid_option"``, ``"unknown_input"``,
    ``"undetermined"``, ``"multipliers"``, ``"timing"``, ``"unknown_load"``, ``"loss_model"``); for ``"not_converged"`` ``history`` lists the
    Newton iterates (dicts with ``residual``, ``damping``, ``trials``,
    ``newton``).
    """

    kind: str
    history: list[dict]

    def __init__(self, message: str, kind: str = "analysis", history=None):
        super().__init__(message)
        self.kind = kind
        self.history = list(history or [])


class SweepError(FluxstepError, ValueError):
    """A sweep description that cannot run (a malformed field, an unknown
    parameter path, a base circuit that does not compile)."""


class StoppedRunWarning(UserWarning):
    """A run stopped on a diagnostic before its stop time; the result holds
    what was recorded up to the fault, and ``Run.stopped`` the
    diagnostic."""


# Shown as fluxstep.X in tracebacks, where users import them from.
for _cls in (
    FluxstepError,
    CircuitError,
    OutputError,
    SimulationError,
    MeasureError,
    UnavailableValueError,
    AnalysisError,
    SweepError,
    StoppedRunWarning,
):
    _cls.__module__ = "fluxstep"
del _cls
