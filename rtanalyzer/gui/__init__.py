"""The desktop window of the live analyzer (PyQt6 + vispy).

Start it with :func:`rtanalyzer.gui.app.run_window` (``rtanalyzer live`` does). Nothing outside
this package imports it; it imports PyQt6 and vispy, and picks vispy's PyQt6 backend once, in
:func:`rtanalyzer.gui.app.select_backend`.
"""
