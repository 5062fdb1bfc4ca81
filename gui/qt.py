"""Qt application bootstrap shared by the GUI, the sheet writer and the tests."""

from __future__ import annotations

import os
import sys

__all__ = ["ensure_app", "png_bytes", "white_canvas"]


def ensure_app(gui: bool = False):
    """Return the running QApplication, creating one if needed.

    Without a display (no DISPLAY/WAYLAND_DISPLAY) and no platform chosen, Qt is told to run
    offscreen, so that sheets and screenshots work on servers and in CI.
    """
    if not os.environ.get("QT_QPA_PLATFORM") and not (
        os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY")
    ) and sys.platform.startswith("linux"):
        os.environ["QT_QPA_PLATFORM"] = "offscreen"
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance()
    if app is None:
        app = QApplication(sys.argv[:1])
        app.setOrganizationName("mwreach")
        app.setApplicationName("mwreach")
    return app


def png_bytes(image) -> bytes:
    """A QImage as PNG bytes (for writing through safefiles, never straight to disk)."""
    from PySide6.QtCore import QBuffer, QByteArray, QIODevice

    data = QByteArray()
    buf = QBuffer(data)
    buf.open(QIODevice.WriteOnly)
    image.save(buf, "PNG")
    buf.close()
    return bytes(data.data())


def white_canvas(width: int, height: int, pt: float = 11.0):
    """(image, painter, font) for a PNG picture: a white ``width`` × ``height`` image, an
    antialiased painter on it and its ``pt``-point DejaVu Sans font, already set. The caller
    ends the painter."""
    from PySide6.QtCore import Qt
    from PySide6.QtGui import QFont, QImage, QPainter

    img = QImage(width, height, QImage.Format_ARGB32)
    img.fill(Qt.white)
    p = QPainter(img)
    p.setRenderHint(QPainter.Antialiasing, True)
    font = QFont("DejaVu Sans", 1)
    font.setPointSizeF(pt)
    p.setFont(font)
    return img, p, font
