"""The main window and the controllers wired into it."""
