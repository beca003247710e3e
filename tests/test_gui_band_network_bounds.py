"""The network band view writes a noise-limited predicted suppression as a bound (Xvfb)."""

from __future__ import annotations

from test_gui_window import qapp, virtual_display  # noqa: F401


def _readout(points):
    from rtanalyzer.live.engine import Readout

    return Readout(measurement="quadrature", t=0.0, frame=0, result={"measurement": "quadrature", "points": points},
                   error=None, levels={}, xruns={}, state="running")


def _qp(f, error_deg, suppression, bound, sigma_deg=1e-4):
    """A quadrature point as ``QuadraturePoint.to_json`` writes it."""
    return {"frequency_hz": f, "phase_difference_deg": 90.0 + error_deg, "phase_error_deg": error_deg,
            "amplitude_ratio_db": 0.0, "time_offset_us": (90.0 + error_deg) / (360.0 * f) * 1e6,
            "predicted_suppression_db": suppression, "predicted_suppression_is_bound": bound,
            "left_dbfs": -10.0, "right_dbfs": -10.0, "phase_uncertainty_deg": sigma_deg,
            "amplitude_uncertainty_db": 1.5e-6, "span_s": 2.0, "status": "quadrature"}


def test_a_noise_limited_network_point_is_shown_as_a_bound(qtbot):
    # The project's rule (as for the sideband view): a figure limited by noise is "≥ X dB" and a
    # hollow triangle, never a plain number. 1 degree gives 41.2 dB (image-rejection relation,
    # Razavi, RF Microelectronics).
    from rtanalyzer.gui.band_view import BandView

    view = BandView()
    qtbot.addWidget(view)
    view.show()
    view.show_readout(_readout([_qp(500.0, 0.0, 101.27, True), _qp(1000.0, 1.0, 41.18, False),
                                _qp(2000.0, 0.0, 103.5, True)]))
    assert view.measurement == "quadrature"
    assert view.worst_text.text() == "worst 41.2 dB at 1000 Hz"  # a measured figure below the bounds wins
    view.select_tone(500.0)
    assert "suppression \u2265 101.2 dB (limited by noise)" in view.tone_detail.text()  # rounded down
    view._dirty = True
    view._redraw()
    assert view.plots[2].drawn == (1, 2)  # 1000 Hz a value; 500 and 2000 Hz hollow triangles
    assert view.plots[0].drawn == (3, 0)  # the phase error itself is shown at every tone
    # every point within the noise: the worst is a bound and no limiter is named
    view.show_readout(_readout([_qp(1000.0, 0.0, 102.0, True)]))
    assert view.worst_text.text() == "worst \u2265 101.2 dB at 500 Hz"
    assert "within their noise" in view.worst_detail.text()
    advice = view.advice_label.text()
    assert advice.startswith("no error above the noise: at least ")
    assert "limited now by" not in advice and "limits you to" not in advice
