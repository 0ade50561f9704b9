"""The command line and the SVG writers import no Qt (DESIGN.md, layers: "cli/ ... no Qt at import",
"svg/ Qt-free figure writers"): ``upstroke info`` or ``export --figures`` start without PySide6.

The desktop commands (gui, demo) import the app only when they run, so every module of
``app.cli`` and ``app.svg`` is imported here, and the parser built, in a fresh interpreter.
"""

import os
import pkgutil
import subprocess
import sys

import app.cli
import app.svg

QT = ("PySide6", "shiboken6", "pyqtgraph")


def _modules(package) -> list[str]:
    return sorted(m.name for m in pkgutil.walk_packages(package.__path__, prefix=package.__name__ + "."))


def _imported_after(modules: list[str], then: str = "") -> list[str]:
    code = (
        "import importlib, sys\n"
        f"for name in {modules!r}:\n"
        "    importlib.import_module(name)\n"
        f"{then}\n"
        f"bad = sorted(m for m in sys.modules if m.split('.')[0] in {QT!r} or m.startswith('app.gui'))\n"
        "print(','.join(bad))\n"
    )
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, env=env)
    return [m for m in out.stdout.strip().split(",") if m]


def test_the_command_line_and_every_command_module_import_no_qt():
    modules = ["app.cli", *(m for m in _modules(app.cli) if not m.endswith("__main__"))]
    assert {"app.cli.analyze", "app.cli.gui", "app.cli.demo", "app.cli.options", "app.cli.reference"} <= set(modules)
    assert _imported_after(modules, "import app.cli; app.cli.build_parser()") == []


def test_the_svg_writers_import_no_qt():
    modules = ["app.svg", *_modules(app.svg)]
    assert {"app.svg.elements", "app.svg.figures"} <= set(modules)
    assert _imported_after(modules) == []


def test_the_check_sees_qt_when_it_is_imported():
    # The same check on the app's window package must find Qt, or it could not fail at all.
    assert "PySide6" in {m.split(".")[0] for m in _imported_after(["app.gui.window"])}
