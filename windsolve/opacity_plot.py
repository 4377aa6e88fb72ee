"""``windsolve check --plot``: kappa and Gamma on the temperatures a wind crosses.

Draws what ``windsolve check`` prints for a model with a temperature path
(its :class:`~windsolve.registry.ModelSpec` has ``opacity_path``): the
opacity in units of kappa_es and the Eddington factor Gamma = kappa L /
(4 pi c G M) against log10 T, one line per log10 R (R = rho / T6^3), with
Gamma = 1 marked.  matplotlib is imported only here.
"""

from typing import TYPE_CHECKING

from .errors import ModelError
from .plotting import pyplot, save

if TYPE_CHECKING:
    from pathlib import Path

__all__ = ["plot_opacity_path"]


def plot_opacity_path(model: object, path: "str | Path") -> "str | Path":
    """Write the figure of kappa / kappa_es and Gamma against log10 T.

    Parameters
    ----------
    model : WindModel
        A model whose registered spec has ``opacity_path`` (Model B).
    path : str or Path
        The image file (PNG, PDF or SVG by its extension).

    Returns
    -------
    str or Path
        ``path``.

    Raises
    ------
    ModelError
        The model has no temperature path (an isothermal wind).
    OutputError
        The file cannot be written.

    References
    ----------
    docs/physics.md, eq. 8 (R) and eq. 12 (Gamma).
    """
    import numpy as np

    from .registry import spec_for
    spec = spec_for(model)
    if spec.opacity_path is None:
        raise ModelError(f"check --plot: a {spec.kind} model has no temperature path to "
                         f"draw (kappa and Gamma along T are drawn for diffusion models)")
    d = spec.opacity_path(model)
    plt = pyplot()
    fig, (top, bottom) = plt.subplots(2, 1, figsize=(6.4, 6.4), sharex=True,
                                      constrained_layout=True)
    for j, r in enumerate(d["log_R"]):
        top.plot(d["log_T"], d["kappa"][:, j] / d["kappa_es"], marker=".",
                 label=f"log R = {r:g}")
        bottom.plot(d["log_T"], d["gamma"][:, j], marker=".")
    bottom.axhline(1.0, color="k", lw=0.8, ls="--")
    bottom.text(d["log_T"][0], 1.0, " Gamma = 1", va="bottom", fontsize=8)
    top.set_ylabel("kappa / kappa_es")
    top.set_title(f"{model.name}: {d['law']} opacity, X = {model.X:g}, Z = {model.Z:g}",
                  fontsize=10)
    top.legend(fontsize=8)
    bottom.set_ylabel("Gamma = kappa L / (4 pi c G M)")
    bottom.set_xlabel("log10 T [K]")
    if np.isfinite(d["gamma"]).any():
        bottom.set_yscale("log")
    return save(plt, fig, path)
