"""Files and safety in the editor window: save and reopen, autosave and recovery after a crash, a
broken file, closing with unsaved changes, recent files, export, window layout kept between runs.

Questions to the user go through a scripted stand-in for :class:`layerloom.gui.files.Prompts`.
"""
import os
import shutil
from pathlib import Path

import pytest

from PySide6.QtCore import QSettings, Qt
from PySide6.QtGui import QAction

from layerloom.core import edits, fileformat
from layerloom.gui.main_window import MainWindow

SAMPLES = Path(__file__).resolve().parents[2] / "samples"


class ScriptedPrompts:
    """Answers the editor's questions from a script and records what was asked."""

    def __init__(self, save_answer="cancel", recover=True, open_choice=None, save_choice=None):
        self.save_answer, self.recover = save_answer, recover
        self.open_choice, self.save_choice = open_choice, save_choice
        self.names: list[str] = []  # answers to ask_name, in order (then the suggested name)
        self.asked: list[tuple[str, str]] = []

    def ask_save_changes(self, name):
        self.asked.append(("save changes", name))
        return self.save_answer

    def ask_recover(self, path):
        self.asked.append(("recover", str(path)))
        return self.recover

    def open_path(self, folder):
        return str(self.open_choice) if self.open_choice else None

    def save_path(self, caption, suggested, file_filter):
        self.asked.append(("save path", caption))
        return str(self.save_choice) if self.save_choice else None

    def error(self, title, text):
        self.asked.append((title, text))

    def ask_name(self, title, label, suggested):
        self.asked.append((title, label))
        return self.names.pop(0) if self.names else suggested


def sample_copy(tmp_path, name: str) -> Path:
    """A copy of a sample in the test's folder, so autosaves and saves never land in samples/."""
    folder = tmp_path / "designs"
    folder.mkdir(exist_ok=True)
    target = folder / name
    shutil.copyfile(SAMPLES / name, target)
    return target


def open_window(qtbot, tmp_path, files=(), prompts=None):
    """A main window on ``files`` (samples are opened from copies in ``tmp_path``)."""
    prompts = prompts or ScriptedPrompts()
    files = [sample_copy(tmp_path, Path(f).name) if Path(f).parent == SAMPLES else f for f in files]
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)
    window = MainWindow(list(map(str, files)), prompts=prompts, settings=settings, scratch_dir=tmp_path / "scratch")
    qtbot.addWidget(window)
    window.show()
    qtbot.waitExposed(window)
    return window, prompts


def add_conv(window):
    doc = window.document
    src = doc.design.of_kind("Input")[0].id
    edit, bid = edits.add_block(doc.design, "Conv2d", {"out_channels": 24}, inputs=[(src, 0)], position=(240, 0))
    doc.apply(edit)
    return bid


def press(qtbot, window, action_name):
    """Trigger a menu command by its shortcut, as a user would."""
    action = window.findChild(QAction, action_name)
    with qtbot.waitActive(window):
        window.activateWindow()
    qtbot.keySequence(window.canvas, action.shortcut())
    return action


def test_save_then_reopen_gives_the_same_design(qtbot, tmp_path):
    window, prompts = open_window(qtbot, tmp_path)
    add_conv(window)
    assert window.isWindowModified() and "[*]" in window.windowTitle()
    prompts.save_choice = tmp_path / "doorstep"
    press(qtbot, window, "save")
    target = tmp_path / "doorstep.loom"
    assert target.exists() and not window.isWindowModified()
    assert "doorstep.loom" in window.windowTitle()
    again, _ = open_window(qtbot, tmp_path, [target])
    assert fileformat.dumps(again.document.design) == fileformat.dumps(window.document.design)
    assert str(target.resolve()) in again.files.recent_files()
    assert [a.text() for a in again.recent_menu.actions()][0] == "doorstep.loom"


def test_autosave_then_crash_then_recover_on_next_start(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path)
    assert window.files.autosave() is None  # nothing unsaved, nothing written
    add_conv(window)
    copy = window.files.autosave()  # the timer's slot
    assert copy == tmp_path / "scratch" / "unsaved.loom.autosave" and copy.exists()
    window.files.timer.stop()  # the process "dies" here: no close, the copy stays
    restarted, prompts = open_window(qtbot, tmp_path, prompts=ScriptedPrompts(recover=True))
    assert prompts.asked[0][0] == "recover"
    assert fileformat.dumps(restarted.document.design) == fileformat.dumps(window.document.design)
    assert restarted.isWindowModified()  # recovered work is not saved yet
    restarted.files.write(tmp_path / "kept.loom")
    assert not copy.exists()


def test_autosave_of_a_saved_file_sits_beside_it_and_declining_removes_it(qtbot, tmp_path):
    target = tmp_path / "bench.loom"
    fileformat.save(fileformat.load(SAMPLES / "fastener_sorter.loom"), target)
    window, _ = open_window(qtbot, tmp_path, [target])
    add_conv(window)
    copy = window.files.autosave()
    assert copy == target.resolve().with_name("bench.loom.autosave")
    window.files.timer.stop()
    restarted, prompts = open_window(qtbot, tmp_path, [target], ScriptedPrompts(recover=False))
    assert prompts.asked[0][0] == "recover"
    assert not copy.exists()
    assert fileformat.dumps(restarted.document.design) == target.read_text(encoding="utf-8")


def test_broken_file_is_reported_and_the_open_design_is_kept(qtbot, tmp_path):
    broken = tmp_path / "broken.loom"
    broken.write_text('{"format": "layerloom-design", "version": 1, "blocks": [', encoding="utf-8")
    before_bytes = broken.read_bytes()
    window, prompts = open_window(qtbot, tmp_path, [SAMPLES / "leaf_blight_grader.loom"])
    kept = fileformat.dumps(window.document.design)
    prompts.open_choice = broken
    press(qtbot, window, "open")
    title, text = prompts.asked[-1]
    assert title == "Cannot open design" and "broken.loom" in text and "not valid JSON" in text
    assert fileformat.dumps(window.document.design) == kept
    assert window.document.path.name == "leaf_blight_grader.loom"
    assert broken.read_bytes() == before_bytes


def test_starting_on_a_broken_file_says_why_and_starts_a_new_design(qtbot, tmp_path):
    broken = tmp_path / "half.loom"
    broken.write_text('{"format": "something-else", "version": 1}', encoding="utf-8")
    window, prompts = open_window(qtbot, tmp_path, [broken])
    assert prompts.asked[0][0] == "Cannot open design" and "not a Layerloom design" in prompts.asked[0][1]
    assert [b.kind for b in window.document.design.blocks.values()] == ["Input"]
    assert window.document.path is None


def test_closing_with_unsaved_changes_asks(qtbot, tmp_path):
    window, prompts = open_window(qtbot, tmp_path)
    add_conv(window)
    window.files.autosave()
    prompts.save_answer = "cancel"
    assert not window.close()
    assert window.isVisible() and prompts.asked[-1][0] == "save changes"
    prompts.save_answer = "save"
    prompts.save_choice = tmp_path / "closing.loom"
    assert window.close()
    assert fileformat.load(tmp_path / "closing.loom").blocks.keys() == window.document.design.blocks.keys()
    assert not (tmp_path / "scratch" / "unsaved.loom.autosave").exists()


def test_discard_on_close_removes_the_autosave_and_layout_is_kept(qtbot, tmp_path):
    window, prompts = open_window(qtbot, tmp_path)
    window.resize(760, 540)
    window.settings_dock.hide()
    add_conv(window)
    copy = window.files.autosave()
    prompts.save_answer = "discard"
    assert window.close() and not copy.exists()
    again, _ = open_window(qtbot, tmp_path)
    assert (again.width(), again.height()) == (760, 540)
    assert not again.settings_dock.isVisible()


def test_status_bar_totals_follow_the_design(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path, [SAMPLES / "shelf_gap_counter_clash.loom"])
    assert window.findings_button.text() == "1 error, 0 warnings"
    before = window.totals_label.text()
    assert "Weights" in before and "MACs" in before and "iB" in before
    bid = add_conv(window)
    assert window.totals_label.text() != before
    # 24 filters of 3×3×3 + 24 biases = 672 weights added (PyTorch: sum(p.numel()) of nn.Conv2d(3, 24, 3))
    assert window.document.design.analysis().result(bid).cost.weights == 672
    qtbot.mouseClick(window.findings_button, Qt.MouseButton.LeftButton)
    assert window.shelf.currentWidget() is window.shelf.findings


def test_export_refuses_a_design_with_errors_and_writes_a_clean_one(qtbot, tmp_path):
    window, prompts = open_window(qtbot, tmp_path, [SAMPLES / "shelf_gap_counter_clash.loom"])
    window.findChild(QAction, "export_module").trigger()
    title, text = prompts.asked[-1]
    assert title == "Not exported" and "join.channels" in text
    assert window.shelf.currentWidget() is window.shelf.findings
    window.files.open_path(sample_copy(tmp_path, "leaf_blight_grader.loom"))
    prompts.save_choice = tmp_path / "grader.py"
    window.findChild(QAction, "export_module").trigger()
    source = (tmp_path / "grader.py").read_text(encoding="utf-8")
    compile(source, "grader.py", "exec")
    assert "nn.Module" in source


def test_export_canvas_pictures(qtbot, tmp_path):
    window, prompts = open_window(qtbot, tmp_path, [SAMPLES / "fastener_sorter.loom"])
    for fmt in ("png", "svg"):
        prompts.save_choice = tmp_path / f"sorter.{fmt}"
        window.findChild(QAction, f"export_{fmt}").trigger()
    assert (tmp_path / "sorter.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # the PNG signature (PNG spec)
    svg = (tmp_path / "sorter.svg").read_text(encoding="utf-8")
    assert svg.count("<path") >= len(window.document.design.blocks)  # at least one outline per card


def _failing_save(monkeypatch, error):
    """Make every write of a design file fail with ``error`` (a full disk, a refused permission)."""
    from layerloom.core import atomic_write

    real = atomic_write.write_atomically

    def write(path, data):
        if str(path).endswith(".autosave") and not isinstance(error, UnicodeError):
            return real(path, data)  # the recovery copy lands elsewhere on a real disk; here it works
        raise error

    monkeypatch.setattr(fileformat, "write_atomically", write)


@pytest.mark.parametrize("error", [OSError(28, "No space left on device"), PermissionError(13, "Permission denied")],
                         ids=["disk full", "permission"])
def test_a_failed_save_says_why_and_keeps_the_design_and_a_recovery_copy(qtbot, tmp_path, monkeypatch, error):
    target = sample_copy(tmp_path, "fastener_sorter.loom")
    window, prompts = open_window(qtbot, tmp_path, [target])
    before = target.read_bytes()
    add_conv(window)
    _failing_save(monkeypatch, error)
    assert window.files.save() is False
    title, text = prompts.asked[-1]
    assert title == "Cannot save design" and error.strerror in text and "still open and unsaved" in text
    assert "recovery copy is kept" in text
    assert window.document.modified and len(window.document.design.blocks) > 0
    copy = target.with_name(target.name + ".autosave")
    assert copy.exists() and len(fileformat.load(copy).blocks) == len(window.document.design.blocks)
    assert target.read_bytes() == before
    monkeypatch.undo()
    window.document.undo_stack.setClean()  # close without questions
    window.close()


def test_a_save_that_cannot_encode_the_text_says_so_and_keeps_the_design(qtbot, tmp_path, monkeypatch):
    target = sample_copy(tmp_path, "fastener_sorter.loom")
    window, prompts = open_window(qtbot, tmp_path, [target])
    add_conv(window)
    window.files.autosave()  # an earlier recovery copy
    copy = target.with_name(target.name + ".autosave")
    saved_copy = copy.read_bytes()
    window.document.design.notes = "\udc80"  # invalid text that slipped past every check
    assert window.files.save() is False
    title, text = prompts.asked[-1]
    assert "cannot be written as UTF-8" in text and "'\\udc80'" in text
    assert window.files.autosave() is None  # the timer's autosave fails quietly into the status bar
    assert "Autosave" in window.statusBar().currentMessage()
    assert copy.read_bytes() == saved_copy  # the earlier recovery copy survives
    window.document.design.notes = ""
    window.document.undo_stack.setClean()
    window.close()


def test_a_file_with_a_251_byte_name_saves_and_gets_a_recovery_copy(qtbot, tmp_path):
    target = tmp_path / ("n" * 246 + ".loom")
    shutil.copyfile(SAMPLES / "fastener_sorter.loom", target)
    window, prompts = open_window(qtbot, tmp_path, [target])
    add_conv(window)
    copy = window.files.autosave()
    assert copy is not None and copy.exists() and copy.parent == target.parent
    assert len(os.fsencode(copy.name)) <= 255
    assert window.files.save() and not copy.exists()  # a normal save removes the copy
    assert len(fileformat.load(target).blocks) == len(window.document.design.blocks)
    window.close()
