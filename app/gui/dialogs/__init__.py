"""The window's dialogs: About, batch analysis of a folder, recovery of unsaved reviews."""

from .about import CAUTION, AboutDialog, about_text
from .batch_dialog import BatchDialog, BatchWorker, add_batch_action, batch_analyse_folder
from .recovery import RecoveryDialog, add_recover_action, ask_recovery, recover_unsaved, update_recover_action

__all__ = [
    "CAUTION", "AboutDialog", "BatchDialog", "BatchWorker", "RecoveryDialog", "about_text", "add_batch_action",
    "add_recover_action", "ask_recovery", "batch_analyse_folder", "recover_unsaved", "update_recover_action",
]
