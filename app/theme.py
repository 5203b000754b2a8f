"""Light and dark themes: the Qt palette of the whole application and pyqtgraph's colours.

The colours come from resources/palette.json through :class:`app.context.Palette`; this
module only applies them.  Plots already on screen are restyled by their views
(:func:`app.plots.style_plot`) when ``AppContext.prefs_changed`` fires.
"""

from __future__ import annotations

import pyqtgraph as pg
from PySide6.QtGui import QColor, QPalette
from PySide6.QtWidgets import QApplication

from .context import Palette


def qt_palette(palette: Palette) -> QPalette:
    """A QPalette for the theme of ``palette`` (window, base, text, highlight …)."""
    bg, fg = palette.ui("background"), palette.ui("foreground")
    panel, grid = palette.ui("panel"), palette.ui("grid")
    accent = palette.trace(0)
    dark = palette.theme == "dark"
    qp = QPalette()
    roles = {
        QPalette.ColorRole.Window: panel,
        QPalette.ColorRole.WindowText: fg,
        QPalette.ColorRole.Base: bg,
        QPalette.ColorRole.AlternateBase: panel,
        QPalette.ColorRole.ToolTipBase: panel,
        QPalette.ColorRole.ToolTipText: fg,
        QPalette.ColorRole.PlaceholderText: QColor(grid).darker(150) if not dark
        else QColor(grid).lighter(160),
        QPalette.ColorRole.Text: fg,
        QPalette.ColorRole.Button: panel,
        QPalette.ColorRole.ButtonText: fg,
        QPalette.ColorRole.BrightText: QColor("#FFFFFF") if dark else QColor("#000000"),
        QPalette.ColorRole.Highlight: accent,
        QPalette.ColorRole.HighlightedText: QColor("#000000") if dark else QColor("#FFFFFF"),
        QPalette.ColorRole.Link: accent,
        QPalette.ColorRole.Mid: grid,
        QPalette.ColorRole.Dark: QColor(grid).darker(130),
        QPalette.ColorRole.Light: QColor(panel).lighter(115),
    }
    for role, colour in roles.items():
        qp.setColor(role, colour)
    disabled = QColor(fg)
    disabled.setAlpha(110)
    for role in (QPalette.ColorRole.Text, QPalette.ColorRole.WindowText,
                 QPalette.ColorRole.ButtonText):
        qp.setColor(QPalette.ColorGroup.Disabled, role, disabled)
    return qp


def apply_theme(app: QApplication, palette: Palette) -> None:
    """Apply ``palette``'s theme to the application and to plots created from now on."""
    # Fusion: the same look on every platform, and it honours the palette.  The style is
    # set once; replacing it under live widgets (at every theme change) is needless
    # work for Qt and has crashed with some widget sets.
    if app.style().name().lower() != "fusion":
        app.setStyle("Fusion")
    app.setPalette(qt_palette(palette))
    pg.setConfigOptions(background=palette.ui("background"),
                        foreground=palette.ui("foreground"), antialias=False)
