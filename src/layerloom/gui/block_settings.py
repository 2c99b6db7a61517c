"""Block settings: the editor for the selected block (or a short summary of several).

Each setting of the block's kind gets a typed field (a text field for numbers, pairs and
padding, a check box for on/off, a list for choices). An accepted change is one undoable edit
(:func:`layerloom.core.edits.set_settings` through :meth:`Document.apply`); a refused one shows the
reason on the message line reserved below the fields (so no field moves), outlines the field and
repeats the reason in its hover text; the field goes back to the value the block keeps. Fields are
set from the model with their signals blocked, so nothing echoes back. Below the fields: in-channels
and shapes from the wires (read-only) and the block's weights and MACs (for the whole batch).

Enter in a field commits it and Escape restores it; both hand the keys back to the canvas
(``finished``). With nothing selected the panel shows the design's own settings
(:mod:`layerloom.gui.design_settings`).

Inside an open motif the panel edits the motif's blocks (a change applies to every use; shapes and
costs are those of the use the canvas shows). Each whole-number setting there has a **param…**
button that exposes it as a motif parameter (:func:`layerloom.core.motif_ops.expose`); an exposed
field shows the parameter's name, and typing a number in it fixes the value again.
"""
from __future__ import annotations

import re
from collections import Counter

from PySide6.QtCore import QEvent, Qt, QTimer, Signal
from PySide6.QtWidgets import (QCheckBox, QComboBox, QFormLayout, QFrame, QHBoxLayout, QLabel, QLineEdit,
                               QScrollArea, QToolButton, QVBoxLayout, QWidget)

from layerloom.core import edits, motif_ops, units
from layerloom.core.kinds import KINDS
from layerloom.core.settings import Setting, SettingError
from layerloom.core.values import one_line
from layerloom.gui import theme
from layerloom.gui.design_settings import DesignSettings
from layerloom.gui.document import Document
from layerloom.gui.files import Prompts
from layerloom.gui.text_fit import WrappedLabel, breakable

_SPLIT = re.compile(r"\s*[×xX*,\s]\s*")
WHOLE_NUMBER_TYPES = ("int", "pair", "padding")  # settings that can hold one whole number, so can be parameters
EXPOSED_STYLE = f"color: {theme.ACCENT.name()}; font-style: italic;"


def entry_value(setting: Setting, text: str):
    """The value typed as ``text`` for ``setting``: ``"3×1"`` → ``[3, 1]`` for a pair, ``"64"`` → ``64``.

    Text that is not a number stays text, so the setting's own check names what is wrong with it.
    """
    text = text.strip()
    if setting.type == "padding" and text.lower() == "same":
        return "same"
    if setting.type in ("pair", "padding"):
        parts = [p for p in _SPLIT.split(text) if p]
        if len(parts) == 2:
            return [_number(p, int) for p in parts]
        return _number(text, int)
    if setting.type == "int":
        return _number(text, int)
    if setting.type == "float":
        return _number(text, float)
    return text


def _number(text: str, cast):
    try:
        return cast(text)
    except ValueError:
        return text


def value_text(value) -> str:
    """A stored value as typed: ``(3, 1)`` → ``3×1``, ``1e-05`` → ``1e-05``, ``64`` → ``64``."""
    if isinstance(value, (list, tuple)):
        return "×".join(str(v) for v in value)
    if isinstance(value, float):
        return f"{value:g}"
    return str(value)


class Field:
    """One setting's widget (with a **param…** button when ``expose`` is given); ``message`` is the
    panel's message line, shared by every field. ``host`` is what goes into the form."""

    def __init__(self, setting: Setting, commit, message: QLabel, expose=None):
        self.setting = setting
        self.params: set[str] = set()  # parameter names of the open motif, read as references when typed
        t = setting.type
        if t == "bool":
            self.widget = QCheckBox(setting.label)
            self.widget.toggled.connect(lambda on: commit(self, on))
        elif t == "choice":
            self.widget = QComboBox()
            self.widget.addItems(list(setting.choices))
            # as wide as the panel lets it be, not as its longest item (a motif's name may be any length)
            self.widget.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
            self.widget.setMinimumContentsLength(8)
            self.widget.activated.connect(lambda i: commit(self, self.widget.itemText(i)))
        else:
            self.widget = QLineEdit()
            self.widget.editingFinished.connect(lambda: commit(self, self.typed()))
        self.widget.setObjectName(f"setting_{setting.key}")
        self.widget.setToolTip(setting.help)
        self.host, self.expose_button = self.widget, None
        if expose is not None:
            self.expose_button = QToolButton()
            self.expose_button.setText("param…")
            self.expose_button.setObjectName(f"expose_{setting.key}")
            self.expose_button.clicked.connect(lambda: expose(self))
            self.host = QWidget()
            row = QHBoxLayout(self.host)
            row.setContentsMargins(0, 0, 0, 0)
            row.setSpacing(4)
            row.addWidget(self.widget, 1)
            row.addWidget(self.expose_button)
        self.message = message

    def typed(self):
        """The line edit's text as a value: a parameter reference if it names one, else a number or pair."""
        text = self.widget.text().strip()
        return {"param": text} if text in self.params else entry_value(self.setting, text)

    def show_value(self, value) -> None:
        """Set the widget from the model without emitting anything; a motif parameter shows its name."""
        w = self.widget
        w.blockSignals(True)
        param = value.get("param") if isinstance(value, dict) else None
        if isinstance(w, QLineEdit):
            w.setStyleSheet(EXPOSED_STYLE if param else "")
            w.setToolTip(f"motif parameter {param}: each instance sets it; type a number to fix it here"
                         if param else self.setting.help)
        if self.expose_button is not None:
            self.expose_button.setEnabled(param is None and isinstance(value, int) and not isinstance(value, bool))
            self.expose_button.setToolTip(
                f"already the motif parameter {param}" if param else
                "Expose as a motif parameter: every instance can set its own value" if self.expose_button.isEnabled()
                else "only a single whole number can be a motif parameter")
        if param is not None and isinstance(w, QLineEdit):
            w.setText(param)
            w.setCursorPosition(0)
        elif isinstance(w, QCheckBox):
            w.setChecked(bool(value))
        elif isinstance(w, QComboBox):
            w.setCurrentIndex(max(w.findText(str(value)), 0))
        else:
            w.setText(value_text(value))
            w.setCursorPosition(0)
        w.blockSignals(False)

    def say(self, text: str) -> None:
        """Say why a value was refused (or, with "", that all is well): on the message line, in the
        field's hover text and as an outline around the field."""
        self.message.setText(text)
        self.widget.setProperty("refused", bool(text))
        self.widget.setToolTip(text or self.setting.help)
        self.widget.style().polish(self.widget)


class BlockSettings(QWidget):
    """The Block settings panel, following ``document.selection``. ``finished`` fires when Enter or
    Escape in a field hands the keys back."""

    finished = Signal()

    def __init__(self, document: Document, parent=None):
        super().__init__(parent)
        self.document = document
        self.block_id: str | None = None
        self.fields: dict[str, Field] = {}
        self._kind_shown: tuple | None = None
        self.ask_name = Prompts(self).ask_name  # (title, label, suggested) → a name or None; the window sets its own

        self.heading = WrappedLabel()
        self.heading.setObjectName("panel_heading")
        self.name_edit = QLineEdit()
        self.name_edit.setObjectName("block_name")
        self.name_edit.editingFinished.connect(self._commit_name)
        self.name_edit.installEventFilter(self)
        self.message = WrappedLabel()  # two lines kept for refusals, so no field moves when one is said
        self.message.setObjectName("field_message")
        self.message.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignTop)
        self.message.setFixedHeight(2 * self.message.fontMetrics().lineSpacing() + 4)
        self.name_message = self.message
        self.design_settings = DesignSettings(document)
        self.design_settings.said.connect(self.message.setText)
        self.design_settings.finished.connect(self.finished)

        self.form_host = QWidget()
        self.form = QFormLayout(self.form_host)
        self.form.setContentsMargins(0, 0, 0, 0)
        self.form.setFieldGrowthPolicy(QFormLayout.FieldGrowthPolicy.AllNonFixedFieldsGrow)

        self.facts = QLabel()
        self.facts.setObjectName("block_facts")
        self.facts.setTextFormat(Qt.TextFormat.RichText)
        self.facts.setWordWrap(True)
        self.facts.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)

        body = QWidget()
        col = QVBoxLayout(body)
        col.addWidget(self.heading)
        col.addWidget(self.name_edit)
        col.addWidget(self.form_host)
        col.addWidget(self.design_settings)
        col.addWidget(self.message)
        rule = QFrame()
        rule.setFrameShape(QFrame.Shape.HLine)
        rule.setObjectName("rule")
        col.addWidget(rule)
        col.addWidget(self.facts)
        col.addStretch(1)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QFrame.Shape.NoFrame)
        scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        scroll.setWidget(body)
        self.setMinimumWidth(260)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.addWidget(scroll)

        document.selection_changed.connect(self._follow_selection)
        document.changed.connect(self._on_change)
        document.replaced.connect(self._on_replaced)
        self._on_replaced()

    # ----- model → widgets
    def _follow_selection(self, ids: list) -> None:
        self.block_id = ids[0] if len(ids) == 1 else None
        self._kind_shown = None
        self.refresh()

    def _on_replaced(self) -> None:
        self._follow_selection(self.document.selection)

    def _on_change(self, change) -> None:
        if self.block_id is not None and self.block_id not in self.document.graph.blocks:
            self.block_id = None
        self.refresh()

    def refresh(self) -> None:
        """Show the selected block (or the summary of several) as the model has it now."""
        graph = self.document.graph
        editing = self.block_id is not None and self.block_id in graph.blocks
        for w in (self.name_edit, self.form_host):
            w.setVisible(editing)
        design_shown = not editing and not self.document.selection and not graph.key
        self.design_settings.setVisible(design_shown)
        if design_shown:
            self.design_settings.refresh()
        if not editing:
            self._clear_fields()
            if self._kind_shown is not None or not design_shown:
                self.message.setText("")
            self._kind_shown = None
            self._show_summary(self.document.selection)
            return
        b = graph.blocks[self.block_id]
        kind = KINDS[b.kind]
        self.heading.setText(kind.title + (f" in motif {graph.key}" if graph.key else ""))
        self.name_edit.blockSignals(True)
        self.name_edit.setText(b.name)
        self.name_edit.blockSignals(False)
        specs = self._specs(b)
        shape_key = (graph.key, self.block_id, tuple(s.key for s in specs), tuple(s.choices for s in specs))
        if shape_key != self._kind_shown:
            self._build_fields(specs)
            self._kind_shown = shape_key
            self.message.setText("")
        params = set(self.document.design.motifs[graph.key].params) if graph.key else set()
        for key, field in self.fields.items():
            if field.expose_button is not None:
                field.params = params
            field.show_value(b.settings.get(key, field.setting.default))
        self.facts.setText(self._facts(b))

    def _specs(self, block) -> list[Setting]:
        """The settings shown for ``block``; a motif instance shows its motif, repeat and parameters;
        a motif's input port shows none (its shape comes from the instance's wire)."""
        kind = KINDS[block.kind]
        if block.kind == "Input" and self.document.graph_key:
            return []
        if block.kind != "Motif":
            return list(kind.settings)
        motif = self.document.design.motifs.get(block.settings["motif"])
        names = tuple(dict.fromkeys([block.settings["motif"], *self.document.design.motifs]))
        choose = Setting("motif", "choice", block.settings["motif"], "Motif", choices=names,
                         help="the motif this block uses")
        params = [Setting(p, "int", default, p, 0, None, help=f"motif parameter (default {default})")
                  for p, default in (motif.params.items() if motif is not None else ())]
        return [choose, kind.settings_by_key["repeat"], *params]

    def _build_fields(self, specs: list[Setting]) -> None:
        self._clear_fields()
        inside = bool(self.document.graph_key)
        for spec in specs:
            field = Field(spec, self._commit, self.message,
                          self._expose if inside and spec.type in WHOLE_NUMBER_TYPES else None)
            self.fields[spec.key] = field
            field.widget.installEventFilter(self)
            self.form.addRow("" if spec.type == "bool" else spec.label, field.host)
            field.host.show()  # at once, not on the next pass of the event loop: Enter may focus it now

    def _clear_fields(self) -> None:
        # deleteLater: a field may be rebuilt from inside its own signal (choosing another motif)
        while self.form.rowCount():
            row = self.form.takeRow(0)
            for item in (row.labelItem, row.fieldItem):
                if item is not None and item.widget() is not None:
                    item.widget().hide()
                    item.widget().deleteLater()
        self.fields = {}

    def _facts(self, block) -> str:
        doc = self.document
        design, graph, results = doc.design, doc.graph, doc.results()
        wires = sorted(graph.in_wires[block.id], key=lambda w: w.dst_port)
        ins = [_shape(results, w.src, w.src_port) for w in wires]
        result = results.get(block.id)
        rows = []
        if KINDS[block.kind].input_count(block.settings) or wires:
            chans = ", ".join(str(s[0]) if s is not None else "?" for s in ins) or "not wired"
            rows.append(("In channels", f"{chans} {_muted('(from the wire)')}"))
            rows.append(("Input shape", ", ".join(str(s) if s is not None else "?" for s in ins) or "—"))
        outs = result.outs if result is not None else ()
        rows.append(("Output shape", ", ".join(str(s) for s in outs) if outs else "unknown"))
        if result is not None:
            rows.append(("Weights", units.count(result.cost.weights)))
            rows.append(("MACs", f"{units.count(result.cost.macs * design.batch)} {_muted(_per(doc, design))}"))
        for f in doc.findings_by_block().get(block.id, []):
            rows.append((f.severity.capitalize(), _escape(f.message)))
        return _table(rows)

    def _show_summary(self, ids: list) -> None:
        doc = self.document
        design, graph = doc.design, doc.graph
        if not ids:
            if graph.key:
                self._show_motif(graph)
                return
            self.heading.setText("Design")
            self.facts.setText(_muted("Select a block on the canvas to see and change its settings."))
            return
        self.heading.setText(f"{len(ids)} blocks selected")
        kinds = Counter(KINDS[graph.blocks[b].kind].title for b in ids)
        shown = doc.results()
        results = [shown.get(b) for b in ids]
        weights = sum(r.cost.weights for r in results if r is not None)
        macs = sum(r.cost.macs for r in results if r is not None) * design.batch
        rows = [("Kinds", ", ".join(f"{n} × {k}" for k, n in kinds.most_common())),
                ("Weights", units.count(weights)),
                ("MACs", f"{units.count(macs)} {_muted(_per(doc, design))}")]
        self.facts.setText(_table(rows))

    def _show_motif(self, motif) -> None:
        """With nothing selected inside a motif: its parameters and uses."""
        design = self.document.design
        self.heading.setText(f"Motif {motif.name}")
        uses = [b.name for g in (design, *design.motifs.values()) for b in g.of_kind("Motif")
                if b.settings.get("motif") == motif.name]
        params = ", ".join(f"{p} = {v}" for p, v in motif.params.items()) or "none yet"
        rows = [("Parameters", _escape(params) + " " + _muted("(defaults)")),
                ("Uses", _escape(", ".join(uses)) if uses else "none"),
                ("", _muted("A change here applies to every use. Select a block to edit it; "
                            "“param…” beside a whole number makes it a parameter."))]
        self.facts.setText(_table(rows))

    # ----- widgets → model
    def _commit(self, field: Field, value) -> None:
        doc, bid = self.document, self.block_id
        design, graph = doc.design, doc.graph
        if bid is None:
            return
        key = field.setting.key
        old = graph.blocks[bid].settings.get(key)
        try:
            edit = edits.set_settings(design, bid, {key: value}, graph=graph.key)
            if edit.ops[0].value == graph.blocks[bid].settings:
                field.show_value(old)  # same value, perhaps typed differently: show it as stored
                return
            doc.apply(edit)
        except (SettingError, edits.EditError) as e:
            field.show_value(old)
            field.say(f"{e} — kept {_value_or_param(old)}")
            return
        field.say("")

    def _expose(self, field: Field) -> None:
        """Ask for a parameter name and make ``field``'s setting that parameter of the open motif."""
        doc, bid = self.document, self.block_id
        motif = doc.design.motifs.get(doc.graph_key)
        if motif is None or bid is None:
            return
        block, key = motif.blocks[bid], field.setting.key
        value = block.settings.get(key)
        suggested, n = key, 1
        while suggested in motif.params and motif.params[suggested] != value:
            n += 1
            suggested = f"{key}_{n}"
        name = self.ask_name("Expose as motif parameter",
                             f"Parameter of motif {motif.name} for {block.name}'s {field.setting.label.lower()} "
                             f"(now {value_text(value)}):", suggested)
        if name is None:
            return
        try:
            doc.apply(motif_ops.expose(doc.design, motif.name, bid, key, name))
        except edits.EditError as e:
            field.say(str(e))
            return
        field.say("")

    def _commit_name(self) -> None:
        design, bid = self.document.graph, self.block_id
        if bid is None:
            return
        name = self.name_edit.text().strip()
        block = design.blocks[bid]
        clash = next((b for b in design.blocks.values() if b.name == name and b.id != bid), None)
        if not name or clash is not None:
            why = "a block needs a name" if not name else f"the name {name!r} is already used by another block"
            self.message.setText(f"{why} — kept {block.name}")
            self.name_edit.setText(block.name)
            return
        self.message.setText("")
        if name != block.name:
            self.document.apply(edits.rename(design, bid, name))


    # ----- keys
    def focus_first(self) -> None:
        """Put the keys in the first setting of the selection (its name when it has none), text selected."""
        first = next((f.widget for f in self.fields.values() if isinstance(f.widget, QLineEdit)), None)
        target = first if first is not None else self.name_edit
        if self.design_settings.isVisible():
            target = self.design_settings.name_edit
        target.setFocus(Qt.FocusReason.TabFocusReason)
        target.selectAll()

    def eventFilter(self, obj, event) -> bool:
        """Enter commits a field (its own editing-finished does that) and Escape shows the block's
        value again; both hand the keys back once the key press is done."""
        if event.type() == QEvent.Type.KeyPress and event.key() in (Qt.Key.Key_Return, Qt.Key.Key_Enter,
                                                                    Qt.Key.Key_Escape):
            if event.key() == Qt.Key.Key_Escape:
                self.refresh()
            QTimer.singleShot(0, self.finished.emit)
        return super().eventFilter(obj, event)


def _shape(results: dict, block_id: str, port: int):
    r = results.get(block_id)
    return r.outs[port] if r is not None and port < len(r.outs) else None


def _per(doc: Document, design) -> str:
    """What a MAC figure covers: the batch, and inside a motif one use of it."""
    return f"(one use, batch {design.batch})" if doc.graph_key else f"(batch {design.batch})"


def _value_or_param(value) -> str:
    return value["param"] if isinstance(value, dict) else value_text(value)


def _muted(text: str) -> str:
    return f"<span style='color:{theme.TEXT_MUTED.name()}'>{text}</span>"


def _escape(text: str) -> str:
    """``text`` for the facts' rich text: one line that may break at long runs, markup escaped."""
    return breakable(one_line(text)).replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def _table(rows: list[tuple[str, str]]) -> str:
    key_style = f"color:{theme.TEXT_MUTED.name()}; padding-right:10px"
    cells = "".join(f"<tr><td style='{key_style}'>{k}</td><td>{v}</td></tr>" for k, v in rows)
    return f"<table cellspacing='0' cellpadding='2'>{cells}</table>"
