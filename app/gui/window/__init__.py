"""The main window and its controllers, wired in one place (:class:`MainWindow`).

:class:`WindowState` is what the window shows; :class:`Display` draws it in the views,
:class:`Loader` opens and analyses, :class:`Reviewer` takes verdicts and conditions, and
:class:`Files` saves, exports and recovers. Background work runs as :class:`Job` on a
:class:`JobRunner`. :mod:`app.gui.window.launch` starts the app (``upstroke gui`` and ``upstroke
demo``); its names stay in that module, whose name its ``launch`` function would hide here.
"""

from .display import Display
from .feedback import Feedback
from .files import Files, open_filter
from .loading import RESULTS_EXTENSIONS, Loader
from .main_window import MainWindow
from .recent import RecentFiles, config_dir
from .reviewing import Reviewer
from .session_bridge import SessionBridge
from .state import WindowState, WindowViews
from .summary_job import start_summary
from .workers import Job, JobRunner

__all__ = [
    "RESULTS_EXTENSIONS", "Display", "Feedback", "Files", "Job", "JobRunner", "Loader", "MainWindow", "RecentFiles",
    "Reviewer", "SessionBridge", "WindowState", "WindowViews", "config_dir", "open_filter", "start_summary",
]
