"""The Upstroke desktop app (PySide6 and pyqtgraph).

Imported only by the ``gui`` and ``demo`` commands and the app's tests, never by the command
line at start-up. Every number it shows comes from the Qt-free core in :mod:`analysis`.
"""

from .refcount_guard import install as _install_refcount_guard

_install_refcount_guard()
