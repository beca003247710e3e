"""A stereo phase-network capture analysed as ``analyze quadrature`` would, for other commands."""

from __future__ import annotations

from typing import Any, Iterable


def quadrature_figures(path: str, tones: Iterable[float] = (), band_hz=(300.0, 3000.0),
                       calibration: Iterable[str] = ()) -> dict[str, Any]:
    """The JSON figures of ``rtanalyzer analyze quadrature PATH`` with the same options."""
    from rtanalyzer.cli.progress import terminal_progress
    from rtanalyzer.measurements.calibration import CalibrationSet
    from rtanalyzer.measurements.quadrature import measure_quadrature, stereo_view
    from rtanalyzer.sources.wavfile import read_capture

    capture = read_capture(path)
    signal = stereo_view(capture, "the analysis")
    profiles = CalibrationSet.load(tuple(calibration), signal.rate_hz, path)
    signal = profiles.prepare(signal)
    result = measure_quadrature(signal, tuple(tones), tuple(band_hz), progress=terminal_progress("quadrature: tone"))
    return profiles.finish(result.to_json(), signal)
