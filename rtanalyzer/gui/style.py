"""The window's palette, type sizes and style sheet: light paper, dark ink, one colour per role.

Colours carry meaning and nothing else: the wanted sideband is teal, the unwanted one
vermilion, the carrier ochre, intermodulation violet, noise grey. A change for the better
is teal and a change for the worse vermilion, like the components they are about.
"""

from __future__ import annotations

PAPER = "#f6f4ef"  # window background
PANEL = "#fdfcf9"  # tiles and control panels
PLOT = "#ffffff"  # plot background
INK = "#1d2226"  # text and axes
INK_SOFT = "#5b6369"  # secondary text
RULE = "#d8d3c8"  # borders
GRID = "#ebe7df"  # plot grid lines

WANTED = "#00796b"  # deep teal
UNWANTED = "#d84315"  # vermilion
CARRIER = "#b8860b"  # ochre
IMD = "#6a4c93"  # violet
NOISE = "#8c8c8c"  # grey, drawn dashed
TRACE = "#34495e"  # the live spectrum
PEAK = "#a9b4bf"  # the peak-hold trace
BEST = "#00796b"  # best-so-far line in the trend

BETTER = WANTED
WORSE = UNWANTED
BANNER = "#fbefd0"  # soft ochre: a notice, not an alarm
BANNER_EDGE = "#e0c27a"
ALARM = "#d84315"  # clip light

ROLE_COLOURS = {"carrier": CARRIER, "wanted": WANTED, "unwanted": UNWANTED, "imd": IMD, "noise": NOISE}

VALUE_PT = 38  # large readouts, readable across the bench (at least 28 pt)
UNIT_PT = 18
TITLE_PT = 12
SMALL_PT = 10

STYLE_SHEET = f"""
QMainWindow, QDialog {{ background: {PAPER}; color: {INK}; }}
QWidget {{ color: {INK}; }}
QDockWidget {{ color: {INK}; font-weight: 600; }}
QDockWidget::title {{ background: {PAPER}; padding: 6px; }}
QScrollArea, QScrollArea > QWidget > QWidget {{ background: {PAPER}; }}
QGroupBox {{ background: {PANEL}; border: 1px solid {RULE}; border-radius: 6px; margin-top: 14px;
            padding: 8px 6px 6px 6px; font-weight: 600; }}
QGroupBox::title {{ subcontrol-origin: margin; left: 10px; padding: 0 4px; color: {INK}; }}
QGroupBox QLabel, QGroupBox QCheckBox, QGroupBox QRadioButton {{ font-weight: 400; }}
QFrame#tile {{ background: {PANEL}; border: 1px solid {RULE}; border-radius: 8px; }}
QLabel#banner {{ background: {BANNER}; border: 1px solid {BANNER_EDGE}; border-radius: 6px;
                 padding: 6px 10px; color: {INK}; }}
QStatusBar {{ background: {PAPER}; color: {INK}; }}
QStatusBar QLabel {{ padding: 0 8px; }}
QToolTip {{ background: {PANEL}; color: {INK}; border: 1px solid {RULE}; }}
"""
