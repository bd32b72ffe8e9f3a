"""How plots look: dark text on white (readable in the window and in exported images)."""
from __future__ import annotations

__all__ = ["PLOT_TEXT", "apply_plot_style", "contrast_ratio"]

#: axis lines, tick labels, axis titles and plot titles (near black; pyqtgraph's default is a pale grey)
PLOT_TEXT = (25, 25, 25)


def apply_plot_style():
    """pyqtgraph options for every plot made after this call."""
    import pyqtgraph as pg

    pg.setConfigOptions(imageAxisOrder="row-major", antialias=True, foreground=PLOT_TEXT, background="w")


def _luminance(rgb):
    c = [v / 255.0 for v in rgb[:3]]
    c = [v / 12.92 if v <= 0.04045 else ((v + 0.055) / 1.055) ** 2.4 for v in c]
    return 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2]


def contrast_ratio(fg, bg=(255, 255, 255)) -> float:
    """Contrast ratio (L1 + 0.05) / (L2 + 0.05) of two sRGB colours (W3C, Web Content Accessibility
    Guidelines 2.1, 2018, definitions of relative luminance and contrast ratio)."""
    a, b = _luminance(fg), _luminance(bg)
    return (max(a, b) + 0.05) / (min(a, b) + 0.05)
