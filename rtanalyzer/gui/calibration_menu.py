"""The window's Calibration menu: choose the profiles taken out of every live readout.

Profiles are the text files ``rtanalyzer calibrate`` writes (rtanalyzer.measurements.calibration)
in ``$RTANALYZER_CALIBRATION_DIR`` or ./calibration. The menu is read afresh each time it opens,
one exclusive group per kind (channels, passband, level) with "none"; a profile made at another
sample rate, or one that cannot be read, is listed but cannot be chosen, with the reason. A
choice restarts the session with the profile applied; the status bar names what is in force.
A profile that does not fit the measurement (channels on one channel, passband on the 90°
network) stops the session with the reason in the banner, like any other set-up problem.
"""

from __future__ import annotations

from PyQt6.QtGui import QAction, QActionGroup
from PyQt6.QtWidgets import QLabel, QMenu

from rtanalyzer.errors import RtaError
from rtanalyzer.measurements.calibration import KINDS, SUFFIX, Profile, load_profile, profile_dir

KIND_TITLES = {
    "channels": "Input channels (right against left)",
    "passband": "Receiver passband",
    "level": "Level in volts",
}


def available_profiles() -> list[tuple[str, Profile | None, str]]:
    """(name, profile or None, why it cannot be read) for every NAME.cal in the profile folder."""
    folder = profile_dir()
    if not folder.is_dir():
        return []
    out = []
    for path in sorted(folder.glob(f"*{SUFFIX}")):
        try:
            out.append((path.stem, load_profile(path.stem), ""))
        except RtaError as exc:
            out.append((path.stem, None, str(exc)))
    return out


def describe(profile: Profile) -> str:
    """One menu line: name, rate, device and date, as the builder wrote them."""
    parts = [f"{profile.rate_hz:g} Hz"]
    if profile.device and profile.device != "unknown":
        parts.append(profile.device)
    if profile.date:
        parts.append(profile.date.replace("T", " ")[:16])
    return f"{profile.name}  ({', '.join(parts)})"


def attach(window) -> QMenu:
    """Add the Calibration menu and a status-bar label to ``window`` (a MainWindow)."""
    help_menu = next((a for a in window.menuBar().actions() if a.text().replace("&", "") == "Help"), None)
    menu = QMenu("&Calibration", window)
    menu.setObjectName("calibration_menu")
    if help_menu is not None:
        window.menuBar().insertMenu(help_menu, menu)
    else:
        window.menuBar().addMenu(menu)
    label = QLabel("")
    label.setObjectName("calibration_status")
    window.statusBar().addPermanentWidget(label)
    window.calibration_menu = menu

    def show_in_force() -> None:
        names = window.config.calibration
        label.setText(f"calibration: {', '.join(names)}" if names else "no calibration")

    def choose(kind: str, name: str | None) -> None:
        kept = [n for n in window.config.calibration if _kind_of(n) not in (kind, None)]
        chosen = tuple(kept + ([name] if name else []))
        if chosen == window.config.calibration:
            return
        window.config = window.config.with_changes(calibration=chosen)
        show_in_force()
        window.rebuild()

    def fill() -> None:
        menu.clear()
        found = available_profiles()
        rate = window.runner.engine.source.rate_hz if window.runner.engine else window.config.rate_hz
        for kind in KINDS:
            section = menu.addSection(KIND_TITLES[kind])
            section.setObjectName(f"section_{kind}")
            group = QActionGroup(menu)
            group.setExclusive(True)
            current = next((n for n in window.config.calibration if _kind_of(n) == kind), None)
            none = _add(menu, group, "none", current is None, f"cal_{kind}_none")
            none.triggered.connect(lambda _=False, k=kind: choose(k, None))
            for name, profile, why in found:
                if profile is None or profile.kind != kind:
                    continue
                act = _add(menu, group, describe(profile), name == current, f"cal_{kind}_{name}")
                if abs(profile.rate_hz - rate) > 1e-6 * rate:
                    act.setEnabled(False)
                    act.setText(f"{describe(profile)} — made at {profile.rate_hz:g} Hz, the session runs at {rate:g} Hz")
                act.triggered.connect(lambda _=False, k=kind, n=name: choose(k, n))
        broken = [(name, why) for name, profile, why in found if profile is None]
        if broken:
            menu.addSection("Cannot be read")
            for name, why in broken:
                act = menu.addAction(f"{name}: {why}")
                act.setEnabled(False)
        menu.addSeparator()
        hint = menu.addAction(f"Profiles live in {profile_dir().resolve()}; make them with rtanalyzer calibrate …")
        hint.setEnabled(False)

    menu.aboutToShow.connect(fill)
    window.runner.started.connect(lambda _engine: show_in_force())
    fill()
    show_in_force()
    return menu


def _kind_of(name: str) -> str | None:
    try:
        return load_profile(name).kind
    except RtaError:
        return None


def _add(menu: QMenu, group: QActionGroup, text: str, checked: bool, name: str) -> QAction:
    act = QAction(text, menu)
    act.setCheckable(True)
    act.setChecked(checked)
    act.setObjectName(name)
    group.addAction(act)
    menu.addAction(act)
    return act
