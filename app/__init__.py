"""tolspread applications: the command line (tolspread.app.cli) and the window (tolspread.app.qt_*)."""
