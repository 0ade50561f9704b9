"""The analysis core stays Qt-free: it imports no Qt, pyqtgraph or app (DESIGN.md, layers)."""

import subprocess
import sys
import pkgutil

import analysis


def test_analysis_imports_no_qt_pyqtgraph_or_app():
    modules = sorted(
        m.name for m in pkgutil.walk_packages(analysis.__path__, prefix="analysis.")
    )
    assert "analysis.recording" in modules  # the walk really found the package
    code = (
        "import importlib, sys\n"
        f"for name in {modules!r}:\n"
        "    importlib.import_module(name)\n"
        "bad = sorted(m for m in sys.modules if m.split('.')[0] in ('PySide6', 'pyqtgraph', 'app', 'shiboken6'))\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"analysis pulled in: {out.stdout.strip()}"


def test_cli_module_imports_no_qt():
    code = "import sys, app.cli; app.cli.build_parser(); print(any(m.startswith('PySide6') for m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
