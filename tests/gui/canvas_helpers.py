"""Helpers for the canvas tests: real mouse drags and drops on a CanvasView's viewport."""
from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QMimeData, QPoint, QPointF, Qt
from PySide6.QtGui import QDragEnterEvent, QDragMoveEvent, QDropEvent, QMouseEvent
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QApplication

from layerloom.gui.canvas import KIND_MIME, CanvasView
from layerloom.gui.document import Document

SHOTS = Path(__file__).resolve().parent.parent / "screenshots"


def open_view(qtbot, design=None, size=(1000, 560)) -> CanvasView:
    doc = Document(design)
    view = CanvasView(doc)
    qtbot.addWidget(view)
    view.resize(*size)
    view.show()
    qtbot.waitExposed(view)
    view.resetTransform()
    return view


def at(view: CanvasView, scene_point) -> QPoint:
    """Viewport point showing ``scene_point``."""
    return view.mapFromScene(QPointF(scene_point))


def drag(view: CanvasView, start: QPoint, end: QPoint, steps: int = 6) -> None:
    """Press the left button at ``start``, move in steps with the button held, release at ``end``."""
    vp = view.viewport()
    QTest.mouseMove(vp, start)
    QTest.mousePress(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, start)
    for i in range(1, steps + 1):
        p = start + (end - start) * (i / steps)
        event = QMouseEvent(QMouseEvent.Type.MouseMove, QPointF(p), QPointF(vp.mapToGlobal(p)),
                            Qt.MouseButton.NoButton, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier)
        QApplication.sendEvent(vp, event)
    QTest.mouseRelease(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, end)


def drop_kind(view: CanvasView, kind: str, point: QPoint) -> None:
    """Drag a kind from Parts onto the viewport at ``point`` (enter, move, drop), as Qt delivers it."""
    mime = QMimeData()
    mime.setData(KIND_MIME, kind.encode("utf-8"))
    vp = view.viewport()
    pf = QPointF(point)
    copy = Qt.DropAction.CopyAction
    for event in (QDragEnterEvent(point, copy, mime, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier),
                  QDragMoveEvent(point, copy, mime, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier),
                  QDropEvent(pf, copy, mime, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier)):
        QApplication.sendEvent(vp, event)


def shot(view: CanvasView, name: str) -> Path:
    SHOTS.mkdir(parents=True, exist_ok=True)
    path = SHOTS / f"{name}.png"
    view.grab().save(str(path))
    return path
