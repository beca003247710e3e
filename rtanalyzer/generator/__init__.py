"""Test-signal generator: tones, two-tone, Schroeder multitone, stepped sweep and I/Q quadrature pairs.

numpy only; the sound card is driven elsewhere (a producer thread fills a ring buffer with
:meth:`Generator.render_into`, the audio callback only copies).

Examples
--------
>>> import numpy as np
>>> from rtanalyzer.generator import Generator, TwoTone
>>> gen = Generator(TwoTone(700.0, 1900.0, -6.0), 48000)
>>> x = gen.render(48000)
>>> bool(np.abs(x).max() <= 10 ** (-6 / 20))
True
"""

from rtanalyzer.generator.errors import GeneratorError, OutputDeviceError
from rtanalyzer.generator.generator import Generator
from rtanalyzer.generator.signals import Multitone, Quadrature, Sweep, Tone, TwoTone
from rtanalyzer.generator.sweep import SweepStep

__all__ = [
    "Generator",
    "GeneratorError",
    "Multitone",
    "OutputDeviceError",
    "Quadrature",
    "Sweep",
    "SweepStep",
    "Tone",
    "TwoTone",
]
