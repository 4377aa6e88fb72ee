"""Pictures of a result (matplotlib, imported only when plotting)."""

from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np

from .errors import OutputError

if TYPE_CHECKING:
    from pathlib import Path
    from types import ModuleType

    from matplotlib.figure import Figure

    from .lines import LineProfile
    from .result import WindResult

__all__ = ["plot_profile", "plot_sweep", "plot_line", "plot_residuals", "plot_chi2"]


def pyplot() -> "ModuleType":
    """matplotlib.pyplot on the file-only Agg backend (imported only when plotting).

    Returns
    -------
    module
        ``matplotlib.pyplot``, with the Agg backend selected.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def _figure(figsize):
    plt = pyplot()
    return plt, plt.subplots(figsize=figsize, constrained_layout=True)


def save(plt: "ModuleType", fig: "Figure", path: "str | Path") -> "str | Path":
    """Write a figure (format by extension) and close it.

    Parameters
    ----------
    plt : module
        ``matplotlib.pyplot`` (from :func:`pyplot`), which closes the figure.
    fig : matplotlib.figure.Figure
        The figure.
    path : str or Path
        Output file; PNG, PDF or SVG by its extension.

    Returns
    -------
    str or Path
        ``path``.

    Raises
    ------
    OutputError
        One line when the file cannot be written (also a format matplotlib lacks).
    """
    from .io import write_figure
    try:
        write_figure(fig, path, dpi=120)
    except ValueError as error:  # a format matplotlib cannot write
        raise OutputError(f"{path}: cannot write the plot ({error})") from None
    finally:
        plt.close(fig)
    return path


def plot_profile(result: "WindResult", path: "str | Path | None" = None) -> "Figure":
    """Velocity, density, Eddington factor and luminosity against radius.

    The sonic (critical) point is marked in every panel; Model B results add
    temperature and optical depth.

    Parameters
    ----------
    result : WindResult
        A solved result (with a profile).
    path : str, Path or None
        Write the figure there (PNG, PDF, SVG by extension) when given.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    OutputError
        The result has no profile, or the file cannot be written.
    """
    import matplotlib.ticker

    plt = pyplot()

    p = result.profile
    if not p or len(p.get("radius", [])) == 0:
        raise OutputError(f"nothing to plot: the result has no profile ({result.message})")
    r = p["radius"].to_value(u.Rsun)
    rc = result.summary.get("sonic_radius", np.nan * u.cm).to_value(u.Rsun)
    panels = [
        ("velocity", u.km / u.s, "velocity  v  [km s$^{-1}$]", "linear"),
        ("density", u.g / u.cm**3, r"density  $\rho$  [g cm$^{-3}$]", "log"),
        ("eddington_factor", u.one, r"Eddington factor  $\Gamma_{\rm eff}$", "linear"),
        ("luminosity", u.Lsun, r"luminosity  $L$  [L$_\odot$]", "linear"),
    ]
    if "optical_depth" in p:
        panels.append(("temperature", u.K, "temperature  T  [K]", "log"))
        panels.append(("optical_depth", u.one, r"optical depth  $\tau$", "log"))
    # A file written by another program may hold only radius, velocity and density.
    panels = [panel for panel in panels if panel[0] in p]
    ncols = 2
    nrows = (len(panels) + 1) // 2
    fig, axes = plt.subplots(nrows, ncols, figsize=(10, 3.2 * nrows), sharex=True,
                             constrained_layout=True, squeeze=False)
    for ax in axes.flat[len(panels):]:
        ax.set_visible(False)
    for ax, (key, unit, label, scale) in zip(axes.flat, panels, strict=False):
        y = p[key].to_value(unit)
        ax.plot(r, y, color="#1f4e79", lw=1.6)
        ax.set_xscale("log")
        ax.set_yscale(scale)
        if scale == "linear":
            ax.ticklabel_format(axis="y", useOffset=False)
        ax.set_ylabel(label)
        ax.grid(True, which="both", alpha=0.25)
        if np.isfinite(rc):
            ax.axvline(rc, color="#b03a2e", ls="--", lw=1.0, label="sonic point")
            if key == "velocity" and "sonic_velocity" in result.summary:
                a = result.summary["sonic_velocity"].to_value(u.km / u.s)
                ax.plot([rc], [a], "o", color="#b03a2e", ms=5)
        if key == "eddington_factor":
            ax.axhline(1.0, color="0.5", lw=0.8, ls=":")
        rph = result.summary.get("photosphere_radius")
        if rph is not None and np.isfinite(rph.value):
            ax.axvline(rph.to_value(u.Rsun), color="#7d3c98", ls="-.", lw=1.0,
                       label="photosphere")
        # Plain numbers on the decades and at 2 and 5 (the default log labels
        # collide on a short range such as 0.5-6 Rsun).
        ax.xaxis.set_major_formatter(matplotlib.ticker.FormatStrFormatter("%g"))
        ax.xaxis.set_minor_locator(matplotlib.ticker.LogLocator(subs=(2.0, 5.0)))
        ax.xaxis.set_minor_formatter(matplotlib.ticker.FormatStrFormatter("%g"))
    for ax in axes[-1]:
        ax.set_xlabel(r"radius  r  [R$_\odot$]")
    axes.flat[0].legend(loc="lower right", frameon=False)
    name = getattr(result.model, "name", "") if result.model is not None else ""
    mdot = result.summary.get("mass_loss_rate", np.nan * u.g / u.s).to_value(u.Msun / u.yr)
    fig.suptitle(f"{name} — {result.model.kind if result.model else ''} wind, "
                 f"Ṁ = {mdot:.3g} M$_\\odot$/yr  ({result.status})")
    if path is not None:
        save(plt, fig, path)
    return fig


def plot_sweep(path: "str | Path", out: "str | Path") -> "str | Path":
    """Mdot and v_inf over a sweep: against one axis, or colour maps over two.

    Failed models are marked with grey crosses and counted in the title;
    each axis is shown in the unit the sweep file wrote it in
    (:func:`windsolve.sweep.axis_views`).

    Parameters
    ----------
    path : str or Path
        A sweep output file (HDF5).
    out : str or Path
        The picture to write (format by extension).

    Returns
    -------
    str or Path
        ``out``.

    Raises
    ------
    OutputError
        The sweep file cannot be read, or the picture cannot be written.
    """
    plt = pyplot()

    from .sweep import axis_views, read_sweep_table

    table, attrs = read_sweep_table(path)
    views = axis_views(path)
    ok = table["converged"].astype(bool)
    mdot = table["mass_loss_rate"] * (u.g / u.s).to(u.Msun / u.yr)
    vinf = table["terminal_velocity"] / 1e5
    n_bad = int((~ok).sum())
    fig, axs = plt.subplots(1, 2, figsize=(11, 4.4), constrained_layout=True)
    quantities = [(mdot, r"mass-loss rate  $\dot M$  [M$_\odot$ yr$^{-1}$]", True),
                  (vinf, r"terminal velocity  $v_\infty$  [km s$^{-1}$]", False)]

    if len(views) == 1:
        x = table[views[0].key] * views[0].factor
        for ax, (y, ylab, logy) in zip(axs, quantities, strict=True):
            order = np.argsort(x)
            ax.plot(x[order][ok[order]], y[order][ok[order]], "o-", ms=3, color="#1f4e79")
            if n_bad:
                ymin = np.nanmin(y[ok]) if ok.any() else 1.0
                ax.plot(x[~ok], np.full(n_bad, ymin), "x", color="0.5", label="no solution")
                ax.legend(frameon=False)
            ax.set_xlabel(views[0].label)
            ax.set_ylabel(ylab)
            if views[0].log:
                _log_scale(ax, "x")
            if logy and ok.any() and np.all(y[ok] > 0):
                ax.set_yscale("log")
            ax.grid(True, which="both", alpha=0.25)
    else:
        x, y = (table[v.key] * v.factor for v in views[:2])
        for ax, (z, zlab, logz) in zip(axs, quantities, strict=True):
            zz = np.log10(z) if logz and ok.any() and np.all(z[ok] > 0) else z
            sc = ax.scatter(x[ok], y[ok], c=zz[ok], cmap="viridis", s=36, marker="s")
            if n_bad:
                ax.scatter(x[~ok], y[~ok], marker="x", color="0.5", s=30, label="no solution")
                ax.legend(frameon=False, loc="best")
            cb = fig.colorbar(sc, ax=ax)
            cb.set_label(("log10 " if zz is not z else "") + zlab)
            ax.set_xlabel(views[0].label)
            ax.set_ylabel(views[1].label)
            for which, view in zip("xy", views[:2], strict=True):
                if view.log:
                    _log_scale(ax, which)
        if len(views) > 2:
            fig.text(0.01, 0.01, f"(first two of {len(views)} axes shown)", fontsize=8)
    fig.suptitle(f"sweep {attrs.get('sweep_file', '')}: {ok.sum()} solutions"
                 + (f", {n_bad} without (x)" if n_bad else ""))
    return save(plt, fig, out)


def _log_scale(ax, which):
    """Log scale on ax's "x" or "y" axis, ticks labelled as plain numbers (3e+06, 40),
    intermediate ticks too when the axis spans little more than a decade."""
    from matplotlib.ticker import LogFormatter

    getattr(ax, f"set_{which}scale")("log")
    axis = ax.xaxis if which == "x" else ax.yaxis
    axis.set_major_formatter(LogFormatter())
    axis.set_minor_formatter(LogFormatter(labelOnlyBase=False, minor_thresholds=(2, 0.5)))


def _speed(x):
    """km/s for a label: whole numbers, or three digits below 10."""
    return f"{x:.0f}" if abs(x) >= 10 else f"{x:.3g}"


def plot_line(line: "LineProfile", path: "str | Path", title: str = "") -> "str | Path":
    """A synthetic line profile with its measured widths marked (FWHM, HWZI, blue edge).

    Parameters
    ----------
    line : LineProfile
        The profile (:func:`windsolve.lines.emission_profile` or
        :func:`windsolve.lines.pcygni_profile`).
    path : str or Path
        The picture to write (format by extension).
    title : str
        Title text before the line's kind.

    Returns
    -------
    str or Path
        ``path``.

    Raises
    ------
    OutputError
        The picture cannot be written.
    """
    plt, (fig, ax) = _figure((8, 4.5))
    w = line.velocity.to_value(u.km / u.s)
    ax.plot(w, line.flux, color="#1f4e79", lw=1.6)
    ax.set_xlabel(r"velocity  [km s$^{-1}$]  (negative: towards the observer)")
    ax.set_ylabel("normalised flux")
    ax.grid(True, alpha=0.25)
    if line.kind == "emission":  # peak 1 by definition, even where the grid misses it
        ax.set_ylim(-0.03, 1.08)
    fwhm = line.fwhm.to_value(u.km / u.s)
    hwzi = line.hwzi.to_value(u.km / u.s)
    edge = line.edge_velocity.to_value(u.km / u.s)
    if np.isfinite(fwhm):
        # the outermost half-maximum crossings (the line can be asymmetric)
        above = np.flatnonzero(line.flux >= 0.5)
        if above.size:
            lo = above[0]
            w_lo = np.interp(0.5, [line.flux[lo - 1], line.flux[lo]], [w[lo - 1], w[lo]]) \
                if lo > 0 else w[lo]
        else:  # measured on the exact profile, narrower than the grid: centre it on the peak
            w_lo = w[int(np.argmax(line.flux))] - 0.5 * fwhm
        w_hi = w_lo + fwhm
        ax.annotate("", xy=(w_lo, 0.5), xytext=(w_hi, 0.5),
                    arrowprops=dict(arrowstyle="<->", color="#b03a2e"))
        ax.text(0.5 * (w_lo + w_hi), 0.53, f"FWHM {_speed(fwhm)} km/s", ha="center",
                color="#b03a2e")
    if np.isfinite(hwzi):
        for x in (-hwzi, hwzi):
            ax.axvline(x, color="#7d3c98", ls=":", lw=1)
        ax.text(hwzi, ax.get_ylim()[1] * 0.9, f" HWZI {_speed(hwzi)}", color="#7d3c98")
    if np.isfinite(edge):
        ax.axvline(edge, color="#196f3d", ls="--", lw=1)
        ax.text(edge, ax.get_ylim()[0], f" edge {_speed(edge)}", color="#196f3d", va="bottom")
    ax.set_title(f"{title} — {line.kind} line".strip(" —"))
    return save(plt, fig, path)


def plot_residuals(rows: list, chi2: float, path: "str | Path") -> "str | Path":
    """Model minus observation, in units of the uncertainty, per measurement.

    Parameters
    ----------
    rows : list of tuple
        (Observation, model value, normalised residual [dimensionless]) per
        measurement, as :func:`windsolve.observe.compare_result` gives them.
    chi2 : float
        Their chi^2 (docs/physics.md, eq. 31), shown in the title.
    path : str or Path
        The picture to write (format by extension).

    Returns
    -------
    str or Path
        ``path``.

    Raises
    ------
    OutputError
        The picture cannot be written.
    """
    plt, (fig, ax) = _figure((7, 0.6 * len(rows) + 1.8))
    labels = [o.label() for o, _, _ in rows]
    z = [r[2] for r in rows]
    ax.barh(range(len(rows)), z, color=["#1f4e79" if abs(v) <= 1 else "#b03a2e" for v in z])
    ax.set_yticks(range(len(rows)), labels)
    for x in (-1, 1):
        ax.axvline(x, color="0.5", ls=":", lw=1)
    ax.axvline(0, color="0.3", lw=0.8)
    ax.set_xlabel(r"(model $-$ observed) / uncertainty")
    ax.set_title(f"chi$^2$ = {chi2:.2f} for {len(rows)} measurements")
    return save(plt, fig, path)


def plot_chi2(table: dict, views: list, chi2: np.ndarray, path: "str | Path") -> "str | Path":
    """chi^2 against one axis, or a map over the first two; failed models marked.

    Parameters
    ----------
    table : dict of ndarray
        The sweep table (:func:`windsolve.sweep.read_sweep_table`), cgs columns.
    views : list of AxisView
        :func:`windsolve.sweep.axis_views` (each axis in the unit the sweep file
        wrote it in, on a log scale if it was log-spaced).
    chi2 : ndarray
        chi^2 per row (docs/physics.md, eq. 31); NaN for failed models.
    path : str or Path
        The picture to write (format by extension).

    Returns
    -------
    str or Path
        ``path``.

    Raises
    ------
    OutputError
        The picture cannot be written.
    """
    ok = np.isfinite(chi2)
    plt, (fig, ax) = _figure((7.5, 5))
    x = table[views[0].key] * views[0].factor
    if len(views) == 1:
        order = np.argsort(x)
        ax.plot(x[order][ok[order]], chi2[order][ok[order]], "o-", ms=3, color="#1f4e79")
        if (~ok).any():
            ax.plot(x[~ok], np.full((~ok).sum(), np.nanmin(chi2) if ok.any() else 1.0), "x",
                    color="0.5", label="no solution")
            ax.legend(frameon=False)
        ax.set_yscale("log")
        ax.set_ylabel(r"$\chi^2$")
    else:
        y = table[views[1].key] * views[1].factor
        sc = ax.scatter(x[ok], y[ok], c=np.log10(chi2[ok]), cmap="viridis_r", s=40, marker="s")
        if (~ok).any():
            ax.scatter(x[~ok], y[~ok], marker="x", color="0.5", s=30, label="no solution")
            ax.legend(frameon=False)
        best = int(np.nanargmin(chi2))
        ax.plot(x[best], y[best], "*", color="#b03a2e", ms=14, label="best")
        fig.colorbar(sc, ax=ax).set_label(r"log$_{10}$ $\chi^2$")
        ax.set_ylabel(views[1].label)
        if views[1].log:
            _log_scale(ax, "y")
    if views[0].log:
        _log_scale(ax, "x")
    ax.set_xlabel(views[0].label)
    ax.set_title(f"{ok.sum()} models compared, {(~ok).sum()} without a solution")
    return save(plt, fig, path)
