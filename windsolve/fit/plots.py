"""A fit's figures: the corner plot of the posterior, and the posterior-predictive plot.

The corner plot is drawn by the ``corner`` package (Foreman-Mackey 2016, JOSS 1, 24),
the optional extra ``windsolve[plots]``; the posterior-predictive plot shows, for each
observed quantity, the distribution of its prediction over the posterior samples
against the measurement and its one-sigma uncertainty.
"""

from pathlib import Path

import numpy as np

from ..errors import WindsolveError
from ..plotting import _scaled, pyplot
from .run import DERIVED_UNITS, posterior_table, read_fit

__all__ = ["corner_plot", "predictive_plot"]


def corner_plot(fit: "str | Path", path: "str | Path", derived: bool = False) -> Path:
    """Write the corner plot of a fit's posterior (free keys, optionally Mdot and v_inf).

    Parameters
    ----------
    fit : str or Path
        A fit's output file.
    path : str or Path
        The image (format by extension).
    derived : bool
        Also show the mass-loss rate [Msun/yr] and terminal velocity [km/s].

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    WindsolveError
        The ``corner`` package is not installed (``pip install "windsolve[plots]"``).
    """
    try:
        import corner
    except ImportError:
        raise WindsolveError("the corner plot needs the corner package: pip install "
                             "\"windsolve[plots]\"") from None
    from ..io import write_figure
    f = read_fit(fit)
    table = posterior_table(f)
    names = list(f.keys) + (["mass_loss_rate", "terminal_velocity"] if derived else [])
    columns, labels = [], []
    for n in names:  # each column in its unit, divided by a power of ten the label states
        unit = getattr(table[n], "unit", None)
        values, label = _scaled(np.asarray(getattr(table[n], "value", table[n]), float), n,
                                "" if unit is None else unit.to_string())
        columns.append(values)
        labels.append(label)
    plt = pyplot()
    fig = corner.corner(np.column_stack(columns), labels=labels, quantiles=(0.16, 0.5, 0.84),
                        show_titles=True, title_fmt=".3g", title_kwargs={"fontsize": 8},
                        label_kwargs={"fontsize": 9})
    fig.set_size_inches(2.6 * len(names), 2.6 * len(names))
    try:
        return write_figure(fig, path, dpi=100)
    finally:
        plt.close(fig)


def predictive_plot(fit: "str | Path", path: "str | Path") -> Path:
    """Write the posterior-predictive plot: each observation against its predictions.

    Parameters
    ----------
    fit : str or Path
        A fit's output file.
    path : str or Path
        The image (format by extension).

    Returns
    -------
    Path
        ``path``.
    """
    import json

    from ..io import write_figure
    f = read_fit(fit)
    table = posterior_table(f)
    observations = json.loads(f.attrs["observations"])
    plt = pyplot()
    n = len(observations)
    fig, axes = plt.subplots(1, n, figsize=(3.2 * n, 3.0), constrained_layout=True,
                             squeeze=False)
    for ax, o in zip(axes[0], observations, strict=True):
        q = o["quantity"]
        pred = np.asarray(table[q].to_value(DERIVED_UNITS[q]), float)
        obs = o["value"] / 1e5  # km/s
        sig = o["uncertainty"] / 1e5
        ax.hist(pred, bins=40, color="0.6", density=True, label="posterior predictions")
        ax.axvspan(obs - sig, obs + sig, color="C0", alpha=0.25, label="observed ±1σ")
        ax.axvline(obs, color="C0")
        label = q + (f" ({o['line']})" if o["line"] not in ("", "-") else "")
        ax.set_xlabel(f"{label} [km/s]")
        ax.set_yticks([])
    axes[0][0].legend(fontsize="small")
    try:
        return write_figure(fig, path, dpi=100)
    finally:
        plt.close(fig)
