"""The knobs of the simulated bench, with their defaults and allowed ranges, checked in one place."""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

from rtanalyzer.errors import RtaError


class BenchError(RtaError):
    """A bench knob, tone list or rate the model cannot honour."""


NETWORKS = ("example", "ideal")
AMPLIFIERS = ("rapp", "cubic", "linear")
SIDES = ("above", "below")
ADC_FORMATS = ("pcm16", "pcm24", "float32")

# knob -> (low, high) inclusive; units are in the knob's name.
_RANGES = {
    "amplitude_trim_db": (-6.0, 6.0),
    "phase_trim_deg": (-30.0, 30.0),
    "lo_quadrature_error_deg": (-30.0, 30.0),
    "carrier_leak_dbc": (-200.0, 0.0),
    "drive_db": (-60.0, 10.0),
    "rapp_smoothness": (0.3, 20.0),
    "am_pm_deg": (-45.0, 45.0),
    "cubic_a3": (-1.0, 1.0),
    "carrier_offset_hz": (-96_000.0, 96_000.0),
    "tuning_error_hz": (-1_000.0, 1_000.0),
    "rx_low_hz": (1.0, 5_000.0),
    "rx_high_hz": (500.0, 96_000.0),
    "rx_order": (1, 8),
    "noise_dbfs": (-200.0, 0.0),
    "capture_pep_dbfs": (-120.0, 20.0),
}
_CHOICES = {"network": NETWORKS, "amplifier": AMPLIFIERS, "wanted_side": SIDES, "adc": ADC_FORMATS}


@dataclass(frozen=True)
class BenchKnobs:
    """Everything that can be turned on the simulated bench.

    The defaults describe the demo rig: the Halyard 20 m phasing exciter on the workshop bench,
    a little out of alignment, watched through a receiver tuned so its suppressed carrier
    lands at 4 kHz in the sound card. Building one validates it (``__post_init__``).

    Attributes
    ----------
    amplitude_trim_db : float
        Gain of the Q audio path relative to the I path, dB (the amplitude trimmer).
    phase_trim_deg : float
        Constant phase added to the Q audio path, degrees (the phase trimmer). The total
        quadrature error at a tone is ``network error + lo_quadrature_error_deg - phase_trim_deg``,
        so this trimmer can null the LO error as well as the network's mean error.
    network : {"example", "ideal"}
        The audio 90-degree network: the example RC pair of `network` or an exact 90 degrees.
    lo_quadrature_error_deg : float
        Departure of the two carrier drives from quadrature, degrees:
        RF = I·cos ωt - Q·sin(ωt + ε).
    carrier_leak_dbc : float
        Carrier left by modulator imbalance, dB relative to the strongest wanted sideband at
        the modulator output.
    amplifier : {"rapp", "cubic", "linear"}
        Envelope model of the linear amplifier; "cubic" is the band-pass equivalent of
        y = x + a3·x³ and exists to check the model against the textbook two-tone result.
    drive_db : float
        Envelope peak (PEP) at the amplifier input relative to its saturation level, dB.
    rapp_smoothness : float
        Rapp smoothness p (large p approaches a hard limiter). The default 0.5 is a very soft
        curve whose products fall only about 1 dB per dB of back-off (a cubic's fall 2 dB),
        so at the default drive of -10 dB a 700/1900 Hz two-tone shows IMD3…IMD9 at about
        -27, -41, -50 and -57 dBc.
    am_pm_deg : float
        AM/PM phase shift at the saturation level, degrees (Saleh-type phase curve).
    cubic_a3 : float
        Cubic coefficient a3 for ``amplifier="cubic"`` (negative compresses).
    carrier_offset_hz : float
        Audio frequency where the receiver puts the suppressed carrier when tuned exactly.
    tuning_error_hz : float
        Receiver mistuning added to the carrier offset.
    wanted_side : {"above", "below"}
        Where the wanted sideband lands in the capture; "below" is a spectrum-inverting receiver.
    rx_low_hz, rx_high_hz : float
        Receiver audio passband edges (Butterworth); the high edge is limited to 0.45 × the
        sample rate, standing in for the sound card's anti-alias filter. An I/Q capture has
        only the low-pass.
    rx_order : int
        Butterworth order of each edge.
    noise_dbfs : float
        RMS of the sound card noise over 0…fs/2 in each channel, relative to the RMS of a
        full-scale sine.
    capture_pep_dbfs : float
        PEP in the capture of the ideal (perfectly aligned, linear) exciter's output; the
        receiver gain is set from it. Above 0 dBFS the sound card clips.
    adc : {"pcm16", "pcm24", "float32"}
        Sample format of the sound card: quantization step and full-scale clip.
    iq : bool
        Quadrature down-converter with stereo output (I left, Q right) instead of mono audio.
    """

    amplitude_trim_db: float = 0.35
    phase_trim_deg: float = 1.2
    network: str = "example"
    lo_quadrature_error_deg: float = 0.3
    carrier_leak_dbc: float = -45.0
    amplifier: str = "rapp"
    drive_db: float = -10.0
    rapp_smoothness: float = 0.5
    am_pm_deg: float = 5.0
    cubic_a3: float = -0.05
    carrier_offset_hz: float = 4000.0
    tuning_error_hz: float = 7.3
    wanted_side: str = "above"
    rx_low_hz: float = 50.0
    rx_high_hz: float = 15_000.0
    rx_order: int = 2
    noise_dbfs: float = -100.0
    capture_pep_dbfs: float = -6.0
    adc: str = "pcm16"
    iq: bool = False

    def __post_init__(self) -> None:
        self.validated()

    def validated(self) -> "BenchKnobs":
        """Check every knob; return self.

        Raises
        ------
        BenchError
            Naming the first bad knob, its value and the allowed range or choices.
        """
        for name, choices in _CHOICES.items():
            value = getattr(self, name)
            if value not in choices:
                raise BenchError(f"bench knob {name}={value!r} is not one of {', '.join(choices)}")
        if not isinstance(self.iq, bool):
            raise BenchError(f"bench knob iq={self.iq!r} must be true or false")
        if isinstance(self.rx_order, bool) or not isinstance(self.rx_order, int):
            raise BenchError(f"bench knob rx_order={self.rx_order!r} must be a whole number 1..8")
        for name, (low, high) in _RANGES.items():
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
                raise BenchError(f"bench knob {name}={value!r} must be a finite number in {low:g}..{high:g}")
            if not low <= value <= high:
                raise BenchError(f"bench knob {name}={value:g} is outside the allowed {low:g}..{high:g}")
        if self.rx_low_hz >= self.rx_high_hz:
            raise BenchError(
                f"bench knob rx_low_hz={self.rx_low_hz:g} must be below rx_high_hz={self.rx_high_hz:g}"
            )
        return self

    def with_changes(self, **changes) -> "BenchKnobs":
        """A copy with some knobs turned (validated); unknown names raise BenchError."""
        unknown = sorted(set(changes) - {f.name for f in dataclasses.fields(self)})
        if unknown:
            raise BenchError(f"no bench knob named {', '.join(unknown)}")
        return dataclasses.replace(self, **changes)

    def as_dict(self) -> dict:
        """All knobs as a JSON-able dict."""
        return dataclasses.asdict(self)
