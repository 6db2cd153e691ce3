"""tolspread applications: the command line (app.cli) and the window (app.qt_*)."""
