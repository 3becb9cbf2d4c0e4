"""Exact small-signal frequency response and loop gain around the periodic
steady state: ``frequency_response``, ``loop_gain``, ``log_frequencies``."""

from ._fluxstep import LoopGain, Response, frequency_response, log_frequencies, loop_gain

__all__ = ["LoopGain", "Response", "frequency_response", "log_frequencies", "loop_gain"]
