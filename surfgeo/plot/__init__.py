"""Figures (matplotlib). Imported lazily by the command line; the numerical core never imports it.

Each module holds the figures of one part: ``spots`` (detected spots on an image),
``spotmap`` (predicted patterns), ``slab`` (pictures of structures), ...
Use the non-interactive Agg backend (:func:`figure`).
"""

from __future__ import annotations


def figure(*args, **kwargs):
    """A new matplotlib figure on the Agg backend (no display needed)."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    return plt.figure(*args, **kwargs)


def save_figure(fig, path, force: bool = False) -> None:
    """Save ``fig`` atomically to ``path`` (format from the ending: .png or .svg) and close it."""
    import matplotlib.pyplot as plt

    from surfgeo.io import atomic_output

    try:
        with atomic_output(path, force) as tmp:
            fig.savefig(tmp, dpi=150, bbox_inches="tight", format=str(path).rsplit(".", 1)[-1].lower())
    finally:
        plt.close(fig)
