"""The desktop app on a real X display (Xvfb), not Qt's offscreen platform: the Quick start's
``upstroke demo`` as a user meets it.

Qt's xcb platform plugin needs system libraries the offscreen one does not (libxcb-icccm4,
libxcb-keysyms1, libxcb-cursor0, ...; the README names them). This test starts Xvfb (and the
openbox window manager when installed) on a free display, runs ``python -m app demo`` there with
``QT_QPA_PLATFORM=xcb``, sends review keys with xdotool (XTEST, as a keyboard would) and reads the
result back from the review's autosave journal, which the window writes after every decision
(``app.gui.window.autosave``). ``.ci/run`` installs Xvfb, xdotool and openbox, so CI runs it.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[3]
NEEDED = ("Xvfb", "xdotool")
pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(not sys.platform.startswith("linux"), reason="Xvfb is an X server for Linux"),
    pytest.mark.skipif(any(shutil.which(t) is None for t in NEEDED),
                       reason="needs Xvfb and xdotool (Debian: apt-get install xvfb xdotool; .ci/run installs them)"),
]


def _free_display() -> int:
    for n in range(90, 190):
        if not os.path.exists(f"/tmp/.X11-unix/X{n}") and not os.path.exists(f"/tmp/.X{n}-lock"):
            return n
    raise RuntimeError("no free X display number between :90 and :189")


def _wait(what: str, check, timeout_s: float, proc: subprocess.Popen | None = None):
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        value = check()
        if value:
            return value
        if proc is not None and proc.poll() is not None:
            out = proc.stdout.read() if proc.stdout else ""
            raise AssertionError(f"the app ended (status {proc.returncode}) before {what}:\n{out[-3000:]}")
        time.sleep(0.25)
    raise AssertionError(f"timed out after {timeout_s:.0f} s waiting for {what}")


def _stop(proc: subprocess.Popen | None) -> None:
    if proc is None or proc.poll() is not None:
        return
    proc.send_signal(signal.SIGTERM)
    try:
        proc.wait(timeout=10)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait(timeout=10)


def _decisions(folder: Path) -> dict | None:
    for path in sorted(folder.glob("autosave/*.json")):
        try:
            return json.loads(path.read_text(encoding="utf-8"))["decisions"]
        except (OSError, ValueError, KeyError):
            return None  # being replaced at this moment: read it again
    return None


def test_demo_window_on_xvfb_takes_review_keys(tmp_path):
    n = _free_display()
    display = f":{n}"
    env = {k: v for k, v in os.environ.items() if k not in ("QT_QPA_PLATFORM", "WAYLAND_DISPLAY")}
    env.update(DISPLAY=display, QT_QPA_PLATFORM="xcb", PYTHONPATH=str(REPO),
               UPSTROKE_CONFIG_DIR=str(tmp_path / "config"))
    xvfb = wm = app = None
    try:
        xvfb = subprocess.Popen(["Xvfb", display, "-screen", "0", "1600x1000x24", "-nolisten", "tcp"],
                                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        _wait("the X server", lambda: os.path.exists(f"/tmp/.X11-unix/X{n}"), 30)
        if shutil.which("openbox"):
            wm = subprocess.Popen(["openbox"], env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        app = subprocess.Popen([sys.executable, "-m", "app", "demo"], env=env, cwd=tmp_path,
                               stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)

        def window() -> str:
            found = subprocess.run(check=False, args=["xdotool", "search", "--onlyvisible", "--name", r"\.abf.* — Upstroke"],
                                   env=env, capture_output=True, text=True)
            return found.stdout.split()[-1] if found.returncode == 0 and found.stdout.split() else ""

        win = _wait("the demo recording's window", window, 240, app)  # title: FILE — Upstroke
        subprocess.run(check=False, args=["xdotool", "windowactivate", "--sync", win], env=env, capture_output=True, timeout=30)
        geometry = subprocess.run(check=False, args=["xdotool", "getwindowgeometry", "--shell", win], env=env,
                                  capture_output=True, text=True, timeout=30).stdout
        geo = dict(line.split("=", 1) for line in geometry.split() if "=" in line)
        # Click the trace (upper middle of the window) so the keys go to the window, not a list.
        x, y = int(geo["X"]) + int(geo["WIDTH"]) // 3, int(geo["Y"]) + int(geo["HEIGHT"]) // 3
        subprocess.run(check=False, args=["xdotool", "mousemove", str(x), str(y), "click", "1"], env=env, timeout=30)
        config = tmp_path / "config"

        def log() -> dict:
            return _decisions(config) or {"beat": [], "accepted": []}

        # A: accept the current beat (the Review menu's key). Until the analysis is done no beat
        # is current and the key does nothing, so it is pressed every few seconds until the
        # journal holds a decision.
        def accepted_one() -> bool:
            if log()["accepted"]:
                return True
            subprocess.run(check=False, args=["xdotool", "key", "a"], env=env, timeout=30)
            time.sleep(2.0)
            return bool(log()["accepted"])

        _wait("a first accept in the autosave journal", accepted_one, 240, app)
        time.sleep(2.0)  # a key still in flight lands now
        before = log()
        assert set(before["accepted"]) == {1} and set(before["sweep"]) == {0}
        last = before["beat"][-1]
        # Accepting moves on to the next beat; N skips one more; A accepts that one.
        subprocess.run(check=False, args=["xdotool", "key", "--delay", "300", "n", "a"], env=env, timeout=30)
        _wait("the second accept", lambda: len(log()["beat"]) == len(before["beat"]) + 1, 60, app)
        after = log()
        assert after["beat"][-1] == last + 2 and after["accepted"][-1] == 1 and after["action"][-1] == "review"
        # P goes back to that beat; E returns it to the automatic verdict (logged as a clear, -1).
        subprocess.run(check=False, args=["xdotool", "key", "--delay", "300", "p", "e"], env=env, timeout=30)
        _wait("the return to the automatic verdict", lambda: len(log()["beat"]) == len(after["beat"]) + 1, 60, app)
        cleared = log()
        assert cleared["beat"][-1] == last + 2 and cleared["accepted"][-1] == -1  # analysis.decisions.CLEAR
        assert app.poll() is None  # the window is still up, no crash on the real display
    finally:
        _stop(app)
        _stop(wm)
        _stop(xvfb)
    out = app.stdout.read() if app is not None and app.stdout else ""
    assert "could not load the Qt platform plugin" not in out, out[-2000:]
