"""matplotlib set-up shared by the picture modules.

matplotlib is an optional extra (``pip install 'optim[plot]'``): :func:`pyplot`
raises a clear :class:`~optim.errors.OptimError` when it is missing. The Agg
backend is selected before ``matplotlib.pyplot`` is first imported, so
pictures are drawn without a display (a backend chosen earlier in the same
process is left alone). Figures are saved atomically as PNG files.
"""

from __future__ import annotations

import importlib.util
import io
import sys
from pathlib import Path

from optim.errors import OptimError
from optim.files import atomic_write

__all__ = ["PLOT_EXTRA_HINT", "plots_available", "pyplot", "save_png"]

PLOT_EXTRA_HINT = "plots need matplotlib; install it with pip install 'optim[plot]'"


def plots_available() -> bool:
    """Whether matplotlib can be imported."""
    return importlib.util.find_spec("matplotlib") is not None


def pyplot():
    """``matplotlib.pyplot``, with the Agg backend unless pyplot was already imported."""
    try:
        import matplotlib
    except ImportError:
        raise OptimError(PLOT_EXTRA_HINT) from None
    if "matplotlib.pyplot" not in sys.modules:
        matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def save_png(figure, path, dpi: int = 100, **options) -> Path:
    """Save a figure as PNG (``options`` go to ``savefig``), atomically, and close it."""
    plt = pyplot()
    buffer = io.BytesIO()
    try:
        figure.savefig(buffer, format="png", dpi=dpi, **options)
    finally:
        plt.close(figure)
    path = Path(path)
    atomic_write(path, buffer.getvalue())
    return path
