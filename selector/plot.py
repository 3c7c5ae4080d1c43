"""Coverage heat-map for ``selector audit --plot FILE.png|.svg`` (matplotlib).

Imported only when a plot is asked for: matplotlib is the optional ``plot`` extra.
The image is rendered to memory and written through :mod:`selector.safeio`
(temporary file in the same folder, then ``os.replace``; an existing file only
with ``--force``).
"""
from __future__ import annotations

import io
from pathlib import Path

import numpy as np

from .errors import InputError

FORMATS = {".png": "png", ".svg": "svg"}
# Our scheme, from "nothing" to "plenty": brick, amber, sand, sage, slate.
BANDS = [(0, "#8c2f1b", "gap"), (1, "#e08a2c", "single source"), (2, "#f1d39a", "2–3"),
         (4, "#93b89a", "4–7"), (8, "#45617f", "8 or more")]
LEGACY_HATCH = "////"


def check_plot_path(path: str, force: bool, inputs=()) -> str:
    """The image format for ``path``; raises :class:`InputError` for another suffix,
    an existing file without ``force``, or an input file."""
    from .safeio import check_destination
    suffix = Path(path).suffix.lower()
    if suffix not in FORMATS:
        raise InputError(f"--plot {path}: give a .png or .svg file name")
    check_destination(path, force, inputs)
    return FORMATS[suffix]


def _pyplot():
    try:
        import matplotlib
    except ImportError:
        raise InputError("--plot needs matplotlib: pip install 'selector[plot]'") from None
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def _colours():
    from matplotlib.colors import BoundaryNorm, ListedColormap
    bounds = [b for b, _, _ in BANDS] + [10 ** 9]
    cmap = ListedColormap([c for _, c, _ in BANDS])
    return cmap, BoundaryNorm(bounds, cmap.N)


def _annotate(ax, counts: np.ndarray, legacy: np.ndarray) -> None:
    for (i, j), value in np.ndenumerate(counts):
        dark = value == 0 or value >= 8
        label = f"{value}" + ("\nlegacy" if legacy[i, j] else "")
        ax.text(j, i, label, ha="center", va="center", fontsize=8,
                color="white" if dark else "#1d1d1d")
        if legacy[i, j]:
            ax.add_patch(_hatched(j, i))


def _hatched(x, y):
    from matplotlib.patches import Rectangle
    return Rectangle((x - 0.5, y - 0.5), 1, 1, fill=False, hatch=LEGACY_HATCH,
                     edgecolor="#f6f1e7", linewidth=0)


def heatmap_figure(audit):
    """A matplotlib Figure of the audit's coverage (standard grid or briefs)."""
    plt = _pyplot()
    cmap, norm = _colours()
    coverage = audit.coverage
    if "supply" in coverage:
        from .coverage import BANDWIDTHS, PRECISIONS, SUPPLY_CLASSES
        supplies, widths = list(SUPPLY_CLASSES), list(BANDWIDTHS)
        fig, axes = plt.subplots(1, len(PRECISIONS), figsize=(4.2 * len(PRECISIONS), 3.8),
                                 sharey=True, constrained_layout=True)
        for ax, precision in zip(np.atleast_1d(axes), PRECISIONS):
            cell = coverage[coverage["precision"] == precision].set_index(
                ["supply", "bandwidth"])
            counts = np.array([[int(cell.loc[(s, w), "qualifying"]) for w in widths]
                               for s in supplies])
            legacy = np.array([[bool(cell.loc[(s, w), "legacy_only"]) for w in widths]
                               for s in supplies])
            ax.imshow(counts, cmap=cmap, norm=norm, aspect="auto")
            _annotate(ax, counts, legacy)
            ax.set_xticks(range(len(widths)), widths, fontsize=8)
            ax.set_yticks(range(len(supplies)), supplies, fontsize=8)
            ax.set_title(f"DC error budget {precision}", fontsize=9)
            ax.set_xlabel("signal bandwidth (gain 10, 10–90 % of the rails)", fontsize=8)
        np.atleast_1d(axes)[0].set_ylabel("supply", fontsize=8)
    else:
        counts = coverage["qualifying"].to_numpy(dtype=int)[:, None]
        legacy = coverage["legacy_only"].to_numpy(dtype=bool)[:, None]
        fig, ax = plt.subplots(figsize=(5.5, 0.9 + 0.35 * len(counts)),
                               constrained_layout=True)
        ax.imshow(counts, cmap=cmap, norm=norm, aspect="auto")
        _annotate(ax, counts, legacy)
        ax.set_yticks(range(len(counts)), list(coverage["profile"]), fontsize=8)
        ax.set_xticks([0], ["active parts qualifying"], fontsize=8)
    from matplotlib.patches import Patch
    handles = [Patch(color=c, label=label) for _, c, label in BANDS]
    handles.append(Patch(facecolor="#8c2f1b", hatch=LEGACY_HATCH, edgecolor="#f6f1e7",
                         label="only nrnd/obsolete parts"))
    fig.legend(handles=handles, loc="outside lower center", ncol=len(handles), fontsize=7,
               frameon=False)
    fig.suptitle(f"Coverage of {Path(audit.library.path).name} "
                 f"({len(audit.library)} parts; counts of active parts that qualify)",
                 fontsize=10)
    return fig


def heatmap_bytes(audit, fmt: str) -> bytes:
    """The heat-map encoded as ``fmt`` (png or svg)."""
    plt = _pyplot()
    fig = heatmap_figure(audit)
    buffer = io.BytesIO()
    try:
        fig.savefig(buffer, format=fmt, dpi=150)
    finally:
        plt.close(fig)
    return buffer.getvalue()


def write_heatmap(audit, path: str, force: bool = False, inputs=()) -> Path:
    """Write the heat-map to ``path`` atomically; refuses to replace a file unless
    ``force``."""
    from .safeio import write_bytes
    fmt = check_plot_path(path, force, inputs)
    return write_bytes(path, heatmap_bytes(audit, fmt), force, inputs)
