"""Right-click menus of the canvas: on a block, on a wire, on empty canvas.

Every action goes through the view's own commands, so each is one undoable edit (or opens Quick add
or a name prompt first). Each action has an object name (``menu_<what>``) for tests and scripts.
"""
from __future__ import annotations

from PySide6.QtWidgets import QMenu


def _add(menu: QMenu, text: str, slot, name: str, enabled: bool = True):
    action = menu.addAction(text, slot)
    action.setObjectName(f"menu_{name}")
    action.setEnabled(enabled)
    return action


def block_menu(view, block_id: str) -> QMenu:
    """The mends of the block's findings first, then rename, duplicate, insert before and after,
    delete (bridging or not), and the motif commands that apply."""
    doc = view.document
    block = doc.graph.blocks[block_id]
    menu = QMenu(view)
    menu.setObjectName("block_menu")
    single = doc.selection == [block_id]
    mends = [m for f in doc.findings_by_block().get(block_id, []) for m in view.canvas_scene.mends(f)]
    for i, mend in enumerate(mends):  # first: a red card's menu opens on its fix
        _add(menu, "Mend: " + mend.label, lambda m=mend: view.canvas_scene.apply_mend(m), f"mend_{i}")
    if mends:
        menu.addSeparator()
    _add(menu, f"Rename {block.name}…", lambda: view.rename_selected(), "rename", single)
    _add(menu, "Duplicate", view.duplicate, "duplicate")
    menu.addSeparator()
    _add(menu, "Insert before…", lambda: view.insert_beside(block_id, before=True), "insert_before", single)
    _add(menu, "Insert after…", lambda: view.insert_beside(block_id, before=False), "insert_after", single)
    menu.addSeparator()
    _add(menu, "Delete", lambda: view.delete_selection(bridge=True), "delete")
    _add(menu, "Delete without bridging", lambda: view.delete_selection(bridge=False), "delete_unbridged")
    menu.addSeparator()
    return view.motif_menu(menu, applicable_only=True)


def wire_menu(view, wire) -> QMenu:
    """Insert a block on the wire (Quick add) or delete the wire."""
    menu = QMenu(view)
    menu.setObjectName("wire_menu")
    _add(menu, "Insert block…", lambda: view.quick_add(wire=wire), "insert_on_wire")
    _add(menu, "Delete wire", lambda: view.remove_wire(wire), "delete_wire")
    return menu


def canvas_menu(view, at) -> QMenu:
    """Quick add at the point clicked (view coordinates), paste, Tidy and fit."""
    menu = QMenu(view)
    menu.setObjectName("canvas_menu")
    _add(menu, "Quick add…", lambda: view.quick_add(at=at), "quick_add")
    _add(menu, "Paste", view.paste, "paste")
    menu.addSeparator()
    _add(menu, "Tidy", view.tidy, "tidy", bool(view.document.graph.blocks))
    _add(menu, "Fit to view", view.fit_all, "fit")
    if len(view.document.trail) > 1:
        _add(menu, "Back", lambda: view.document.back(), "back")
    return menu
