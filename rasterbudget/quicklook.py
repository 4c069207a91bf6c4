"""Quick-look picture: one panel per main output, with colour bars and units."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import rasterio

from .outputs import FLUX_OUTPUTS, PARTIAL_SUFFIX

#: Panels: (output stem, colour map, fixed range or None for the 2-98 % range of the data).
PANELS = (
    ("net_radiation", "inferno", None),
    ("ground_heat_flux", "copper", None),
    ("sensible_heat_flux", "OrRd", None),
    ("latent_heat_flux", "PuBuGn", None),
    ("evaporative_fraction", "BrBG", (0.0, 1.0)),
    ("et_daily", "YlGnBu", None),
)

MAX_PIXELS = 800  # longest side of each panel, decimated on read


def _read_decimated(path: Path) -> np.ndarray:
    with rasterio.open(path) as src:
        factor = max(1, int(np.ceil(max(src.width, src.height) / MAX_PIXELS)))
        shape = (max(1, src.height // factor), max(1, src.width // factor))
        return src.read(1, out_shape=shape, masked=True).filled(np.nan)


def write_quicklook(outputs: dict[str, Path], path: Path, title: str) -> Path:
    """Render the panels to a PNG (written atomically)."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    # A fixed layout: constrained layout cost about 0.35 s per figure, most of a small scene's run.
    fig, axes = plt.subplots(2, 3, figsize=(13, 7.5))
    fig.subplots_adjust(left=0.02, right=0.97, bottom=0.03, top=0.9, wspace=0.12, hspace=0.18)
    for ax, (name, cmap, fixed) in zip(axes.flat, PANELS, strict=True):
        data = _read_decimated(outputs[name])
        finite = data[np.isfinite(data)]
        if fixed is not None:
            vmin, vmax = fixed
        elif finite.size:
            vmin, vmax = np.percentile(finite, [2, 98])
        else:
            vmin, vmax = 0.0, 1.0
        image = ax.imshow(data, cmap=cmap, vmin=vmin, vmax=vmax, interpolation="nearest")
        units, _ = FLUX_OUTPUTS[name]
        ax.set_title(name.replace("_", " "))
        ax.set_xticks([])
        ax.set_yticks([])
        fig.colorbar(image, ax=ax, shrink=0.85, label=units)
    fig.suptitle(title)
    partial = path.with_name(path.name + PARTIAL_SUFFIX)
    fig.savefig(partial, dpi=90, format="png")
    plt.close(fig)
    partial.replace(path)
    return path
