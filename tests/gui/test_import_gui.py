"""File ▸ Import… and File ▸ Export ▸ ONNX file… in the editor, driven through their widgets."""
from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

from PySide6.QtCore import Qt
from PySide6.QtGui import QAction
from test_window_files import SAMPLES, open_window

from layerloom.gui.interchange import ImportDialog, ImportRequest, module_names, run_import

NET = textwrap.dedent("""
    import torch
    from torch import nn

    class TrayCamera(nn.Module):
        def __init__(self, classes=3):
            super().__init__()
            self.stem = nn.Conv2d(3, 16, 3, 2, 1)
            self.shuffle_width = 4
            self.fc = nn.Linear(16, classes)

        def forward(self, x):
            x = torch.relu(self.stem(x))
            x = torch.roll(x, 1, 3)
            return self.fc(torch.flatten(x.mean((2, 3), keepdim=True), 1))

    def tray_camera(classes=3):
        return TrayCamera(classes)
""")


def open_import_dialog(qtbot, window) -> ImportDialog:
    window.findChild(QAction, "import").trigger()
    dialog = window.findChild(ImportDialog)
    qtbot.waitUntil(dialog.isVisible)
    return dialog


def test_dialog_lists_module_classes_and_says_the_file_runs(qtbot, tmp_path):
    source = tmp_path / "tray.py"
    source.write_text(NET, encoding="utf-8")
    assert module_names(str(source)) == ["TrayCamera", "tray_camera"]  # read from the text, nothing run
    window, _ = open_window(qtbot, tmp_path)
    dialog = open_import_dialog(qtbot, window)
    assert not dialog.import_button.isEnabled()
    qtbot.keyClicks(dialog.source, str(source))
    dialog.grab().save(str(_screenshots() / "import_dialog.png"))
    assert [dialog.name.itemText(i) for i in range(dialog.name.count())] == ["TrayCamera", "tray_camera"]
    assert dialog.caution.text() == f"import runs {source}'s code — only import code you trust"
    assert dialog.import_button.isEnabled()
    qtbot.keyClicks(dialog.input, "3x64x64")
    qtbot.keyClicks(dialog.args, '{"classes": 5}')
    dialog.name.setCurrentText("tray_camera")
    qtbot.mouseClick(dialog.import_button, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(lambda: window.import_job is None, timeout=60_000)  # the import runs in a worker thread
    design = window.document.design
    assert [b.kind for b in design.blocks.values()] == ["Input", "Conv2d", "ReLU", "Unmapped", "AdaptiveAvgPool2d",
                                                       "Flatten", "Linear", "Output"]
    assert design.ledger().totals.weights == (3 * 16 * 9 + 16) + (16 * 5 + 5)  # PyTorch's parameter count
    assert window.document.modified and window.document.path is None  # unsaved work until saved
    assert "1 unmapped" in window.statusBar().currentMessage()
    assert any(f.code == "import.unmapped" for f in design.findings())
    for size in ((1280, 800), (1920, 1080)):
        window.resize(*size)
        qtbot.wait(50)
        window.canvas.fit_all()
        window.grab().save(str(_screenshots() / f"import_{size[0]}x{size[1]}.png"))


def _screenshots() -> Path:
    folder = Path(__file__).resolve().parents[1] / "screenshots"
    folder.mkdir(exist_ok=True)
    return folder


def test_a_failed_import_says_why_and_keeps_the_design(qtbot, tmp_path):
    (tmp_path / "weights.pth").write_bytes(b"\x80\x04")
    window, prompts = open_window(qtbot, tmp_path, [SAMPLES / "fastener_sorter.loom"])
    before = len(window.document.design.blocks)
    dialog = open_import_dialog(qtbot, window)
    qtbot.keyClicks(dialog.source, str(tmp_path / "weights.pth"))
    assert not dialog.caution.isVisible()
    qtbot.mouseClick(dialog.import_button, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(lambda: bool(prompts.asked) and prompts.asked[-1][0] == "Not imported", timeout=60_000)
    title, text = prompts.asked[-1]
    assert title == "Not imported" and "pickle" in text and "never opens one" in text
    assert len(window.document.design.blocks) == before


def test_closing_the_window_during_an_import_is_safe(qtbot, tmp_path):
    source = tmp_path / "tray.py"
    source.write_text(NET, encoding="utf-8")
    window, _ = open_window(qtbot, tmp_path)
    assert run_import(window, ImportRequest(f"{source}:TrayCamera", "3x64x64", ""))
    _, worker = window.import_job
    with qtbot.waitSignal(worker.finished, timeout=60_000):  # the import ends on its own
        window.close()
    qtbot.waitUntil(lambda: window.import_job is None)


def test_export_onnx_from_the_menu(qtbot, tmp_path):
    window, prompts = open_window(qtbot, tmp_path, [SAMPLES / "fastener_sorter.loom"])
    prompts.save_choice = tmp_path / "sorter.onnx"
    window.findChild(QAction, "export_onnx").trigger()
    assert (tmp_path / "sorter.onnx").stat().st_size > 0
    assert "onnxruntime agrees with torch" in window.statusBar().currentMessage()
    window.files.open_path(SAMPLES / "shelf_gap_counter_clash.loom", ask=False)
    window.findChild(QAction, "export_onnx").trigger()
    assert prompts.asked[-1][0] == "Not exported" and "join.channels" in prompts.asked[-1][1]


def test_editor_modules_import_neither_torch_nor_onnx():
    code = ("import layerloom.gui.main_window, layerloom.gui.interchange, layerloom.importing, layerloom.interchange, "
            "layerloom.cli, sys; bad = sorted(m for m in sys.modules if m.split('.')[0] in ('torch', 'onnx', "
            "'onnxruntime')); assert not bad, bad")
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(p for p in sys.path if p)}
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]

