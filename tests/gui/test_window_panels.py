"""Block settings, Findings and Parts, driven as a user would (pytest-qt, real widgets).

Each test checks both directions: what typing/clicking does to the design, and what a change
of the design (undo) does to the widgets.
"""
from pathlib import Path

from PySide6.QtCore import QPoint, Qt

from layerloom import Design, load
from layerloom.core.kinds import KINDS
from layerloom.gui.block_settings import BlockSettings, entry_value
from layerloom.gui.document import Document
from layerloom.gui.findings_list import FindingsList
from layerloom.gui.shelf import KIND_MIME, Shelf

SAMPLES = Path(__file__).resolve().parents[2] / "samples"


def small_design():
    d = Design("porch-parcel-spotter")
    x = d.input(3, 64, 64, name="frame")
    conv = d.add("Conv2d", x, name="stem", out_channels=16, kernel=3, stride=2, padding=1)
    relu = d.add("ReLU", conv)
    d.add("Output", relu)
    return d, conv, relu


def type_into(qtbot, line_edit, text):
    """Click the field, replace its text by typing, press Enter."""
    qtbot.mouseClick(line_edit, Qt.MouseButton.LeftButton)
    line_edit.selectAll()
    qtbot.keyClicks(line_edit, text)
    qtbot.keyClick(line_edit, Qt.Key.Key_Return)


def settings_panel(qtbot, design):
    doc = Document(design)
    panel = BlockSettings(doc)
    qtbot.addWidget(panel)
    panel.show()
    qtbot.waitExposed(panel)
    return doc, panel


def test_typed_setting_is_one_undoable_edit_and_undo_updates_the_field(qtbot):
    design, conv, relu = small_design()
    doc, panel = settings_panel(qtbot, design)
    doc.select([conv])
    field = panel.fields["out_channels"].widget
    assert field.text() == "16"
    type_into(qtbot, field, "48")
    assert design.blocks[conv].settings["out_channels"] == 48
    assert doc.undo_stack.count() == 1
    # a 1-in stride-2 3×3 conv with padding 1 on 64×64 gives 32×32 (PyTorch Conv2d size formula, common practice)
    assert str(design.analysis().shape(conv)) == "48×32×32"
    assert "48×32×32" in panel.facts.text()
    doc.undo_stack.undo()
    assert design.blocks[conv].settings["out_channels"] == 16
    assert field.text() == "16"  # model → widget
    assert "16×32×32" in panel.facts.text()


def test_invalid_entry_is_refused_inline_and_the_value_stays(qtbot):
    design, conv, relu = small_design()
    doc, panel = settings_panel(qtbot, design)
    doc.select([conv])
    field = panel.fields["out_channels"]
    type_into(qtbot, field.widget, "0")
    assert design.blocks[conv].settings["out_channels"] == 16
    assert doc.undo_stack.count() == 0
    assert field.message.isVisible()
    assert "below the minimum 1" in field.message.text() and "kept 16" in field.message.text()
    assert field.widget.text() == "16"
    type_into(qtbot, panel.fields["kernel"].widget, "three")
    assert "whole number" in panel.fields["kernel"].message.text()
    assert design.blocks[conv].settings["kernel"] == 3


def test_pair_checkbox_and_name_fields(qtbot):
    design, conv, relu = small_design()
    doc, panel = settings_panel(qtbot, design)
    doc.select([conv])
    type_into(qtbot, panel.fields["kernel"].widget, "1x7")
    assert tuple(design.blocks[conv].settings["kernel"]) == (1, 7)
    # padding 1 with a 1×7 kernel, stride 2 on 64: height floor((64+2-1)/2)+1 = 33, width floor((64+2-7)/2)+1 = 30
    # (PyTorch Conv2d size formula, common practice)
    assert str(design.analysis().shape(conv)) == "16×33×30"
    bias = panel.fields["bias"].widget
    assert bias.isChecked()
    qtbot.mouseClick(bias, Qt.MouseButton.LeftButton, pos=QPoint(8, bias.height() // 2))  # on the box
    assert design.blocks[conv].settings["bias"] is False
    type_into(qtbot, panel.name_edit, "entry_conv")
    assert design.blocks[conv].name == "entry_conv"
    type_into(qtbot, panel.name_edit, "relu_1")  # taken by the ReLU
    assert design.blocks[conv].name == "entry_conv"
    assert "already used" in panel.name_message.text()
    assert doc.undo_stack.count() == 3
    doc.undo_stack.undo()
    doc.undo_stack.undo()
    assert panel.fields["bias"].widget.isChecked()
    assert panel.name_edit.text() == "stem"


def test_in_channels_shapes_and_costs_are_shown_read_only(qtbot):
    design, conv, relu = small_design()
    doc, panel = settings_panel(qtbot, design)
    doc.select([conv])
    text = panel.facts.text()
    assert "from the wire" in text and "3×64×64" in text
    # 16 filters of 3×3×3 plus 16 biases = 448 weights (PyTorch: sum(p.numel()) of nn.Conv2d(3, 16, 3))
    assert "448" in text
    doc.select([conv, relu])
    assert panel.heading.text() == "2 blocks selected"
    assert not panel.name_edit.isVisible()
    doc.select([])
    assert "Select a block" in panel.facts.text()


def test_motif_instance_shows_motif_repeat_and_parameters(qtbot):
    design = load(SAMPLES / "leaf_blight_grader.loom")
    doc, panel = settings_panel(qtbot, design)
    instance = design.of_kind("Motif")[0]
    motif = design.motifs[instance.settings["motif"]]
    doc.select([instance.id])
    assert panel.fields["motif"].widget.currentText() == motif.name
    assert panel.fields["repeat"].widget.text() == str(instance.settings["repeat"])
    assert set(motif.params) <= set(panel.fields)
    param = next(iter(motif.params))
    type_into(qtbot, panel.fields[param].widget, "-1")
    assert "below the minimum 0" in panel.fields[param].message.text()
    assert doc.undo_stack.count() == 0


def test_entry_value_reads_trade_notation():
    kernel = KINDS["Conv2d"].settings_by_key["kernel"]
    padding = KINDS["Conv2d"].settings_by_key["padding"]
    assert tuple(entry_value(kernel, "3×1")) == (3, 1)
    assert entry_value(kernel, " 5 ") == 5
    assert entry_value(padding, "same") == "same"
    assert entry_value(KINDS["Dropout"].settings_by_key["p"], "0.25") == 0.25


def test_findings_list_shows_the_clash_and_mend_clears_it(qtbot):
    design = load(SAMPLES / "shelf_gap_counter_clash.loom")
    doc = Document(design)
    findings = FindingsList(doc)
    qtbot.addWidget(findings)
    findings.show()
    tree = findings.tree
    assert tree.topLevelItemCount() == 1
    item = tree.topLevelItem(0)
    assert [item.text(i) for i in range(3)] == ["error", "join.channels", "add_2"]
    assert "64 channels to 128" in item.text(3)
    assert not findings.mend_button.isEnabled()
    with qtbot.waitSignal(findings.block_chosen) as chosen:
        qtbot.mouseClick(tree.viewport(), Qt.MouseButton.LeftButton, pos=tree.visualItemRect(item).center())
    add_2 = design.block("add_2").id
    assert chosen.args == [add_2] and doc.selection == [add_2]
    assert findings.mend_button.isEnabled()
    assert "1×1 projection to 128 channels" in findings.mend_label.text()
    qtbot.mouseClick(findings.mend_button, Qt.MouseButton.LeftButton)
    assert not [f for f in design.findings() if f.code == "join.channels"]
    assert tree.topLevelItemCount() == 0
    assert doc.undo_stack.count() == 1
    doc.undo_stack.undo()
    assert tree.topLevelItemCount() == 1 and tree.topLevelItem(0).text(1) == "join.channels"


def test_parts_tiles_grouped_by_family_filter_and_carry_the_kind(qtbot):
    design, _, _ = small_design()
    shelf = Shelf(Document(design))
    qtbot.addWidget(shelf)
    shelf.show()
    parts = shelf.parts
    headings = [g.family for g in parts.groups]
    assert [g.heading.text() for g in parts.groups][2] == "Norm && activation"  # shows as "Norm & activation"
    assert headings[:2] == ["Ends", "Convolution"]
    assert len(headings) == len(set(headings))
    for group, family in zip(parts.groups, headings):
        assert all(KINDS[t.kind].family == family for t in group.tiles)
    assert parts.tiles["Pointwise"].label.text() == "1×1 convolution"
    qtbot.keyClicks(parts.filter, "1x1")
    shown = [k for k, t in parts.tiles.items() if t.isVisible()]
    assert shown == ["Pointwise"]
    parts.filter.clear()
    assert all(t.isVisible() for t in parts.tiles.values())
    qtbot.keyClicks(parts.filter, "zzz")
    assert parts.empty.isVisible()
    data = parts.tiles["Pointwise"].mime_data()
    assert bytes(data.data(KIND_MIME)).decode("utf-8") == "Pointwise"


def test_budget_and_target_change_refreshes_findings_status_and_badges(qtbot, tmp_path):
    """Design ▸ Budget and target… is an edit like any other: the Findings tab, the status bar
    counts and the canvas badges follow it at once (and its undo)."""
    from PySide6.QtCore import QSettings

    from layerloom.gui.budget_dialog import BudgetDialog
    from test_window_files import open_window

    window, _ = open_window(qtbot, tmp_path, [SAMPLES / "fastener_sorter.loom"])
    doc, scene = window.document, window.canvas.scene()
    assert not [f for f in window.shelf.findings.findings if f.code.startswith("budget.")]
    dialog = BudgetDialog(doc, QSettings(str(tmp_path / "budget.ini"), QSettings.Format.IniFormat), window)
    qtbot.addWidget(dialog)
    dialog.macs.setValue(20)  # millions; the sample needs more
    dialog.choice.setCurrentText("phone, 2 big CPU cores")
    dialog.accept()
    listed = [f for f in window.shelf.findings.findings if f.code == "budget.macs"]
    assert len(listed) == 1 and listed[0].block in doc.design.blocks
    assert window.findings_button.text().endswith("1 warning")
    assert any(f.code == "budget.macs" for b in scene.badges.get(listed[0].block, []) for f in b.findings)
    doc.undo_stack.undo()
    assert not [f for f in window.shelf.findings.findings if f.code.startswith("budget.")]
    assert window.findings_button.text().endswith("0 warnings")
