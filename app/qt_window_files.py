"""The window's file commands: New, Open, Open recent, Save, Save As, the prompt before
unsaved changes are discarded, and the message box for a file that could not be read or
written (one line in the status bar too; never a traceback).

:class:`WindowFiles` is a mixin of :class:`~tolspread.app.qt_mainwindow.MainWindow`: it uses
the window's ``session``, ``settings``, ``recovery``, ``recent_menu`` and ``show_status``.
The recent files and the last folder are kept in the window's settings.
"""
from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from PySide6.QtCore import QTimer
from PySide6.QtWidgets import QApplication, QFileDialog, QMessageBox

from ..designfile import load_demo
from ..errors import InputError, ValidationError

MAX_RECENT = 8


class WindowFiles:
    """File commands of the main window (a mixin; see the module docstring)."""

    def confirm_discard(self) -> bool:
        """Ask before unsaved changes are thrown away; True to go on."""
        if not self.session.dirty:
            return True
        answer = QMessageBox.question(
            self, "Unsaved changes", "The design has unsaved changes. Save them first?",
            QMessageBox.StandardButton.Save | QMessageBox.StandardButton.Discard | QMessageBox.StandardButton.Cancel)
        if answer == QMessageBox.StandardButton.Save:
            return self.file_save()
        return answer == QMessageBox.StandardButton.Discard

    def file_new(self) -> None:
        if self.confirm_discard():
            d = load_demo()
            self.session.replace_design(replace(d, name="untitled (from the demo)", mask=()), None)

    def file_open(self) -> None:
        if not self.confirm_discard():
            return
        path, _ = QFileDialog.getOpenFileName(self, "Open design", str(self.last_dir()), "Designs (*.json);;All files (*)")
        if path:
            self.open_path(Path(path))

    def open_path(self, path: Path) -> bool:
        try:
            self.session.open(path)
        except ValidationError as exc:
            self.show_problem(f"{path.name} could not be opened", "\n".join(exc.lines()))
            return False
        except InputError as exc:
            self.show_problem(f"{path.name} could not be opened", str(exc))
            return False
        self._remember_recent(path)
        self.show_status(f"opened {path}")
        return True

    def file_save(self) -> bool:
        if self.session.path is None:
            return self.file_save_as()
        return self._save_to(self.session.path)

    def file_save_as(self) -> bool:
        path, _ = QFileDialog.getSaveFileName(self, "Save design", str(self.last_dir() / "design.json"),
                                              "Designs (*.json)")
        if not path:
            return False
        if not path.endswith(".json"):
            path += ".json"
        return self._save_to(Path(path))

    def _save_to(self, path: Path) -> bool:
        try:
            self.session.save_as(path)
        except InputError as exc:
            self.show_problem("Saving failed; the previous file is unchanged", str(exc))
            return False
        self._remember_recent(path)
        self.show_status(f"saved {path}")
        self.recovery.discard()  # the saved file holds the work now
        return True

    def show_problem(self, title: str, text: str) -> None:
        self.show_status(f"{title}: {text.splitlines()[0] if text else ''}")
        box = QMessageBox(QMessageBox.Icon.Warning, title, text, QMessageBox.StandardButton.Ok, self)
        box.setObjectName("problem_box")
        if QApplication.platformName() == "offscreen":
            box.setModal(False)
            box.show()
            QTimer.singleShot(0, box.close)
            return
        box.exec()

    def last_dir(self) -> Path:
        """The folder a file dialog starts in (the last one a file was opened or saved in)."""
        return Path(self.settings.value("last_dir", str(Path.home())))

    def _remember_recent(self, path: Path) -> None:
        path = path.resolve()
        recent = [p for p in self.recent_files() if Path(p) != path]
        recent.insert(0, str(path))
        self.settings.setValue("recent_files", recent[:MAX_RECENT])
        self.settings.setValue("last_dir", str(path.parent))
        self._refresh_recent()

    def recent_files(self) -> list[str]:
        v = self.settings.value("recent_files", [])
        return [v] if isinstance(v, str) else list(v or [])

    def _refresh_recent(self) -> None:
        self.recent_menu.clear()
        for p in self.recent_files():
            a = self.recent_menu.addAction(p)
            a.triggered.connect(lambda _c=False, p=p: self.confirm_discard() and self.open_path(Path(p)))
        self.recent_menu.setEnabled(bool(self.recent_files()))
