"""Files and safety: new, open, save, save as, recent files, autosave and recovery after a crash.

- Saving is atomic (:func:`layerloom.core.fileformat.save`).
- While the design has unsaved changes, a copy is written every minute to ``NAME.loom.autosave``
  beside the file (an unsaved design: ``unsaved.loom.autosave`` in the application's data
  folder). A normal save or close removes it; if it is still there at the next start (a crash),
  the editor offers to recover it.
- A file that cannot be read is reported with the reader's message (the file and the place in
  it) and the current design stays as it was.

Every question to the user goes through :class:`Prompts`, which tests replace.
"""
from __future__ import annotations

import os
import zlib
from pathlib import Path

from PySide6.QtCore import QObject, QSettings, QStandardPaths, QTimer, Signal
from PySide6.QtWidgets import QFileDialog, QInputDialog, QMessageBox

from layerloom.core import fileformat
from layerloom.core.fileformat import LoomFileError
from layerloom.core.values import quote
from layerloom.gui.document import Document

AUTOSAVE_MS = 60_000
AUTOSAVE_SUFFIX = ".autosave"
NAME_MAX = 255  # bytes in a file name on common file systems
UNSAVED_NAME = "unsaved.loom"
RECENT_KEY, RECENT_LIMIT = "files/recent", 8
DESIGN_FILTER = "Layerloom designs (*.loom)"


def why_not_saved(error: Exception) -> str:
    """A save error in words: the system's reason, or the text that cannot be written."""
    if isinstance(error, UnicodeEncodeError):
        return (f"the design holds text that cannot be written as UTF-8 "
                f"({quote(error.object[error.start:error.end])} at character {error.start + 1} of the file)")
    if isinstance(error, OSError):
        return error.strerror or str(error)
    return str(error)


class Prompts:
    """The questions the editor asks, as modal dialogs over ``parent``."""

    def __init__(self, parent=None):
        self.parent = parent

    def ask_save_changes(self, name: str) -> str:
        """``"save"``, ``"discard"`` or ``"cancel"``."""
        box = QMessageBox(QMessageBox.Icon.Question, "Unsaved changes",
                          f"{name} has changes that are not saved.", parent=self.parent)
        box.setInformativeText("Save them before closing the design?")
        buttons = QMessageBox.StandardButton
        box.setStandardButtons(buttons.Save | buttons.Discard | buttons.Cancel)
        box.setDefaultButton(buttons.Save)
        return {buttons.Save: "save", buttons.Discard: "discard"}.get(QMessageBox.StandardButton(box.exec()), "cancel")

    def ask_recover(self, autosave: Path) -> bool:
        answer = QMessageBox.question(
            self.parent, "Recover unsaved work",
            f"Layerloom did not close normally. An automatic copy of unsaved work was found:\n{autosave}\n\n"
            "Recover it? (Choosing No deletes the copy.)")
        return answer == QMessageBox.StandardButton.Yes

    def open_path(self, folder: str) -> str | None:
        path, _ = QFileDialog.getOpenFileName(self.parent, "Open design", folder, DESIGN_FILTER)
        return path or None

    def save_path(self, caption: str, suggested: str, file_filter: str) -> str | None:
        path, _ = QFileDialog.getSaveFileName(self.parent, caption, suggested, file_filter)
        return path or None

    def error(self, title: str, text: str) -> None:
        QMessageBox.warning(self.parent, title, text)

    def ask_name(self, title: str, label: str, suggested: str) -> str | None:
        """A name typed by the user (a new motif's, a motif parameter's), or None if cancelled."""
        text, ok = QInputDialog.getText(self.parent, title, label, text=suggested)
        return text.strip() if ok and text.strip() else None


class FileKeeper(QObject):
    """Keeps ``document`` tied to its file: every file command of the window goes through here."""

    said = Signal(str)  # a short message for the status bar
    recent_changed = Signal()

    def __init__(self, document: Document, prompts: Prompts, settings: QSettings, scratch_dir: str | Path | None = None,
                 parent=None):
        super().__init__(parent)
        self.document, self.prompts, self.settings = document, prompts, settings
        if scratch_dir is None:
            scratch_dir = QStandardPaths.writableLocation(QStandardPaths.StandardLocation.AppDataLocation)
        self.scratch_dir = Path(scratch_dir)
        self.timer = QTimer(self)
        self.timer.setInterval(AUTOSAVE_MS)
        self.timer.timeout.connect(self.autosave)
        self.timer.start()

    # ----- names
    @property
    def display_name(self) -> str:
        path = self.document.path
        return path.name if path is not None else f"{self.document.design.name} (not saved)"

    def autosave_path(self) -> Path:
        """``NAME.loom.autosave`` beside the file; for a name near the 255-byte limit, its first
        200 bytes and a checksum of the whole name instead of NAME.loom."""
        path = self.document.path
        if path is None:
            return self.scratch_dir / (UNSAVED_NAME + AUTOSAVE_SUFFIX)
        name = os.fsencode(path.name)
        if len(name) + len(AUTOSAVE_SUFFIX) > NAME_MAX:
            name = name[:200] + f"~{zlib.crc32(name):08x}".encode()
        return path.with_name(os.fsdecode(name) + AUTOSAVE_SUFFIX)

    # ----- autosave and recovery
    def autosave(self) -> Path | None:
        """Write the autosave copy if there are unsaved changes; returns where it went."""
        if not self.document.modified:
            return None
        target = self.autosave_path()
        try:
            target.parent.mkdir(parents=True, exist_ok=True)
            fileformat.save(self.document.design, target)
        except (OSError, ValueError) as e:
            self.said.emit(f"Autosave to {target} failed: {why_not_saved(e)}")
            return None
        return target

    def drop_autosave(self) -> None:
        self.autosave_path().unlink(missing_ok=True)

    def offer_recovery(self) -> bool:
        """If an autosave copy of the current design survives, offer it; True when it was taken."""
        copy = self.autosave_path()
        path = self.document.path
        if not copy.exists() or (path is not None and path.exists() and copy.stat().st_mtime < path.stat().st_mtime):
            return False
        if not self.prompts.ask_recover(copy):
            copy.unlink(missing_ok=True)
            return False
        try:
            design = fileformat.load(copy)
        except LoomFileError as e:
            self.prompts.error("Cannot recover", f"The automatic copy cannot be read, so it is kept as it is.\n\n{e}")
            return False
        self.document.set_design(design, path)
        self.document.undo_stack.resetClean()  # recovered work is unsaved until saved
        self.said.emit(f"Recovered unsaved work from {copy.name}")
        return True

    # ----- commands
    def start(self, files: list[str]) -> None:
        """Open ``files[0]`` (a broken file: say why and keep the new design), or offer recovery."""
        if files and not self.open_path(files[0], ask=False):
            return
        self.offer_recovery()

    def confirm_discard(self) -> bool:
        """Ask what to do with unsaved changes; True when it is fine to let the design go."""
        if not self.document.modified:
            return True
        answer = self.prompts.ask_save_changes(self.display_name)
        if answer == "save":
            return self.save()
        return answer == "discard"

    def new(self) -> bool:
        if not self.confirm_discard():
            return False
        self.drop_autosave()
        self.document.set_design(Document.new_design())
        return True

    def open(self) -> bool:
        folder = str(self.document.path.parent) if self.document.path else ""
        path = self.prompts.open_path(folder)
        return self.open_path(path) if path else False

    def open_path(self, path: str | Path, ask: bool = True) -> bool:
        """Load ``path`` into the document; on a broken file show why and keep the current design."""
        path = Path(path)
        if ask and not self.confirm_discard():
            return False
        try:
            design = fileformat.load(path)
        except LoomFileError as e:
            self.prompts.error("Cannot open design", str(e))
            self.said.emit(f"{path.name} was not opened")
            return False
        self.drop_autosave()
        self.document.set_design(design, path.resolve())
        self.remember(path)
        self.said.emit(f"Opened {path.name}")
        if ask:
            self.offer_recovery()
        return True

    def save(self) -> bool:
        if self.document.path is None:
            return self.save_as()
        return self.write(self.document.path)

    def save_as(self) -> bool:
        suggested = str(self.document.path or Path(self.document.design.name + ".loom"))
        chosen = self.prompts.save_path("Save design as", suggested, DESIGN_FILTER)
        if not chosen:
            return False
        path = Path(chosen)
        return self.write(path if path.suffix == ".loom" else path.with_name(path.name + ".loom"))

    def write(self, path: Path) -> bool:
        """Save atomically to ``path``; the old autosave copy goes. On failure say why, keep the
        design open and unsaved, and leave (or write) its recovery copy."""
        try:
            fileformat.save(self.document.design, path)
        except (OSError, ValueError) as e:
            copy = self.autosave_path()
            if not copy.exists():
                copy = self.autosave()
            kept = f"A recovery copy is kept at {copy}." if copy else "No recovery copy could be written either."
            self.prompts.error("Cannot save design",
                               f"{path}: {why_not_saved(e)}\nThe design is still open and unsaved. {kept}")
            self.said.emit(f"{path.name} was not saved")
            return False
        self.drop_autosave()  # the copy under the old name (or of the unsaved design)
        self.document.mark_saved(path.resolve())
        self.drop_autosave()  # and any stale copy under the new name
        self.remember(path)
        self.said.emit(f"Saved {path.name}")
        return True

    def close(self) -> bool:
        """Prepare a normal close; False when the user cancels."""
        if not self.confirm_discard():
            return False
        self.drop_autosave()
        self.timer.stop()
        return True

    # ----- recent files
    def recent_files(self) -> list[str]:
        value = self.settings.value(RECENT_KEY, [])
        return [value] if isinstance(value, str) else list(value or [])

    def remember(self, path: str | Path) -> None:
        text = str(Path(path).resolve())
        files = [text] + [f for f in self.recent_files() if f != text]
        self.settings.setValue(RECENT_KEY, files[:RECENT_LIMIT])
        self.recent_changed.emit()

    def forget(self, path: str) -> None:
        self.settings.setValue(RECENT_KEY, [f for f in self.recent_files() if f != path])
        self.recent_changed.emit()
