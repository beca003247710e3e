"""The package's layering, checked by reading the source (ast), not by importing it.

Layers, lowest first: dsp -> sources, generator -> measurements -> store, live -> gui, cli.
``rtanalyzer.errors`` sits below them all. A module may import its own layer and the ones
below, never one above, not even inside a function. Qt, vispy and PortAudio stay out of
everything but the GUI and the sound-card modules at import time.
"""

from __future__ import annotations

import ast
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "rtanalyzer"

RANK = {
    "errors": 0,
    "dsp": 1,
    "sources": 2,
    "generator": 2,
    "measurements": 3,
    "store": 4,
    "live": 4,
    "gui": 5,
    "cli": 5,
}
HEAVY = {"PyQt6", "vispy", "sounddevice"}
GUI_ONLY = {"PyQt6", "vispy"}
# Modules allowed to import sounddevice when loaded: the GUI and the sound-card code.
AUDIO_DIRS = ("gui", "audio")
AUDIO_STEMS = ("soundcard", "audio", "live_stream", "device")


def _python_files(folder: Path) -> list[Path]:
    return sorted(p for p in folder.rglob("*.py") if "__pycache__" not in p.parts)


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _resolve(node: ast.ImportFrom, module: str, is_package: bool) -> str:
    """Absolute module name of a ``from ... import`` (relative levels resolved)."""
    if node.level == 0:
        return node.module or ""
    base = module.split(".")
    if not is_package:
        base = base[:-1]
    base = base[: len(base) - (node.level - 1)]
    return ".".join(base + ([node.module] if node.module else []))


def _imports(path: Path, top_level_only: bool = False) -> list[tuple[str, int]]:
    """(imported module, line) for each import in ``path``.

    With ``top_level_only``, imports inside functions (run only when called) are left out;
    those in ``if``/``try`` blocks and class bodies at module level run on import and count.
    """
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    module = _module_name(path)
    is_package = path.name == "__init__.py"
    found: list[tuple[str, int]] = []

    def visit(node: ast.AST) -> None:
        for child in ast.iter_child_nodes(node):
            if top_level_only and isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef, ast.Lambda)):
                continue
            if isinstance(child, ast.Import):
                found.extend((alias.name, child.lineno) for alias in child.names)
            elif isinstance(child, ast.ImportFrom):
                base = _resolve(child, module, is_package)
                found.append((base, child.lineno))
                # `from rtanalyzer import dsp` imports the submodule rtanalyzer.dsp
                if base in ("rtanalyzer",):
                    found.extend((f"{base}.{alias.name}", child.lineno) for alias in child.names)
            visit(child)

    visit(tree)
    return found


def _layer(module: str) -> str | None:
    parts = module.split(".")
    if parts[0] != "rtanalyzer" or len(parts) < 2:
        return None
    return parts[1] if parts[1] in RANK else None


def _is_audio_module(path: Path) -> bool:
    rel = path.relative_to(PACKAGE)
    if any(part in AUDIO_DIRS for part in rel.parts[:-1]):
        return True
    return rel.stem.startswith(AUDIO_STEMS)


def test_sources_parse():
    for path in _python_files(PACKAGE):
        ast.parse(path.read_text(encoding="utf-8"), filename=str(path))


def test_dsp_imports_only_numpy_scipy_and_stdlib():
    allowed_third_party = {"numpy", "scipy"}
    forbidden_stdlib = {"sqlite3", "tkinter"}  # storage and GUI belong to upper layers
    problems = []
    for path in _python_files(PACKAGE / "dsp"):
        for name, line in _imports(path):
            top = name.split(".")[0]
            if name == "__future__" or top in allowed_third_party:
                continue
            if top == "rtanalyzer":
                if name == "rtanalyzer.errors" or name == "rtanalyzer.dsp" or name.startswith("rtanalyzer.dsp."):
                    continue
            elif top in sys.stdlib_module_names and top not in forbidden_stdlib:
                continue
            problems.append(f"{path.relative_to(ROOT)}:{line} imports {name}")
    assert not problems, "dsp/ must import only numpy, scipy, stdlib, rtanalyzer.dsp, rtanalyzer.errors:\n" + "\n".join(
        problems
    )


def test_lower_layers_never_import_upper_ones():
    problems = []
    for path in _python_files(PACKAGE):
        own = _layer(_module_name(path))
        if own is None:
            continue  # rtanalyzer/__init__.py, __main__.py
        for name, line in _imports(path):
            target = _layer(name)
            if target is not None and RANK[target] > RANK[own]:
                problems.append(f"{path.relative_to(ROOT)}:{line} ({own}) imports {name} ({target})")
    assert not problems, "a lower layer imports an upper one:\n" + "\n".join(problems)


def test_heavy_packages_only_in_gui_and_audio_modules_at_import_time():
    problems = []
    for path in _python_files(PACKAGE):
        rel = path.relative_to(PACKAGE)
        in_gui = rel.parts[0] == "gui"
        audio = _is_audio_module(path)
        for name, line in _imports(path, top_level_only=True):
            top = name.split(".")[0]
            if top not in HEAVY:
                continue
            if in_gui or (audio and top not in GUI_ONLY):
                continue
            problems.append(f"rtanalyzer/{rel}:{line} imports {name} at module level")
    assert not problems, (
        "import Qt/vispy/sounddevice inside the function that needs them (or move the module under "
        "rtanalyzer/gui or a sound-card module):\n" + "\n".join(problems)
    )


def test_core_import_leaves_gui_and_audio_unloaded():
    code = (
        "import sys\n"
        "import rtanalyzer.measurements, rtanalyzer.dsp, rtanalyzer.sources.wavfile\n"
        "print(','.join(sorted(m for m in ('PyQt6', 'sounddevice', 'vispy') if m in sys.modules)))\n"
    )
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    result = subprocess.run(
        [sys.executable, "-c", code], cwd=ROOT, env=env, capture_output=True, text=True, timeout=120
    )
    assert result.returncode == 0, result.stderr
    assert result.stdout.strip() == "", f"loaded on core import: {result.stdout.strip()}"


# The scanner itself, on small examples.


@pytest.mark.parametrize(
    "source,top_only,expected",
    [
        ("import PyQt6.QtCore\n", True, ["PyQt6.QtCore"]),
        ("def f():\n    import sounddevice\n", True, []),
        ("def f():\n    import sounddevice\n", False, ["sounddevice"]),
        ("try:\n    import vispy\nexcept ImportError:\n    pass\n", True, ["vispy"]),
        ("class A:\n    import PyQt6\n", True, ["PyQt6"]),
        ("from . import window\n", False, ["rtanalyzer.dsp"]),
        ("from ..errors import RtaError\n", False, ["rtanalyzer.errors"]),
        ("from rtanalyzer import measurements\n", False, ["rtanalyzer", "rtanalyzer.measurements"]),
    ],
)
def test_scanner(tmp_path, monkeypatch, source, top_only, expected):
    fake_root = tmp_path
    path = fake_root / "rtanalyzer" / "dsp" / "example.py"
    path.parent.mkdir(parents=True)
    path.write_text(source)
    monkeypatch.setattr(sys.modules[__name__], "ROOT", fake_root)
    assert [name for name, _ in _imports(path, top_level_only=top_only)] == expected
