"""Simulated bench: a phasing SSB exciter, a down-converting receiver and a sound card, in numpy.

Use `simulate_capture` for a capture plus its exact truth, or `Bench` to stream blocks (the live
engine turns knobs with `Bench.set_knobs` while it runs).
"""

from rtanalyzer.sources.bench.knobs import BenchError, BenchKnobs
from rtanalyzer.sources.bench.model import Bench, simulate_capture
from rtanalyzer.sources.bench.truth import image_rejection_db

__all__ = ["Bench", "BenchError", "BenchKnobs", "image_rejection_db", "simulate_capture"]
