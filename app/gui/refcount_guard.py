"""A guard against a reference-counting fault of PySide6 6.12.0 on Python 3.11.

That release returns ``None``, ``True`` and ``False`` to Python without counting the reference
(as if they were immortal, which they are only from Python 3.12 on): every signal emitted or
disconnected drops one reference to ``True``, and many calls one to ``None``. After a few hundred
the interpreter aborts ("deallocating None"). PySide6 6.11 does not do this, and the project's
requirements leave 6.12.0 out; this guard keeps the app alive where 6.12.0 is installed anyway.

:func:`install` probes for the fault once (a signal emitted on a throwaway object) and, only when
the count really drops, starts a daemon thread that tops the three objects' reference counts back
up whenever they fall below a large floor. The objects are never freed either way, so the only
effect is that the interpreter's sanity check never fires.
"""

from __future__ import annotations

import ctypes
import sys
import threading
import time

__all__ = ["install", "fault_present"]

_FLOOR = 1 << 22
_started = False


def _add_references(obj: object, n: int) -> None:
    # ob_refcnt is the first field of every CPython object, at the object's address.
    ctypes.c_ssize_t.from_address(id(obj)).value += n


def fault_present() -> bool:
    """True when emitting a Qt signal drops a reference to ``True`` (PySide6 6.12.0, Python < 3.12)."""
    if sys.version_info >= (3, 12) or sys.implementation.name != "cpython":
        return False
    from PySide6 import QtCore

    class _Probe(QtCore.QObject):
        ping = QtCore.Signal()

    probe = _Probe()
    before = sys.getrefcount(True)
    for _ in range(16):
        probe.ping.emit()
    lost = before - sys.getrefcount(True)
    if lost > 0:
        _add_references(True, lost)
    return lost > 0


def _top_up() -> None:
    while True:
        for obj in (None, True, False):
            count = sys.getrefcount(obj)
            if count < _FLOOR:
                _add_references(obj, 2 * _FLOOR - count)
        time.sleep(0.02)


def install() -> bool:
    """Start the guard when the fault is present; returns whether it runs."""
    global _started
    if _started:
        return True
    if not fault_present():
        return False
    for obj in (None, True, False):
        _add_references(obj, 2 * _FLOOR)
    threading.Thread(target=_top_up, name="refcount-guard", daemon=True).start()
    _started = True
    return True
