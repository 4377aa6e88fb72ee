"""Pictures of a result (matplotlib, imported only when plotting).

What every figure here keeps to (the README's paragraph "Plots"):

* one normalisation per kind of line, said on the y axis (emission: F / F_peak, continuum 0;
  P Cygni: F / F_c, continuum 1), and the line settings written beside the axes;
* the HWZI marks at the two ends of the line where its measurement found them (the
  occulted red wing ends short of the blue one), not at a symmetric +-HWZI;
* legends outside the axes, so they cover no data;
* a log axis carries at least :data:`MIN_TICK_LABELS` labelled ticks, however short its
  span; no axis shows matplotlib's offset or "1e6" multiplier text: values too large or
  small for plain numbers are divided by a power of ten that the axis label states;
* a sweep with three or more axes is drawn in facets (one row of panels per value of the
  further axes, or per range of the third when its values are too many), and the title says
  what each row holds and what, if anything, is left out;
* a line profile that is not a consistent solution is refused (:func:`check_line`), and a
  wind profile that did not converge is drawn grey and marked "NOT A SOLUTION";
* the chi^2 map carries the Delta chi^2 confidence contours and says how many free
  parameters the sweep has.
"""

from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np

from .errors import OutputError

if TYPE_CHECKING:
    from pathlib import Path
    from types import ModuleType

    from matplotlib.figure import Figure

    from .lines import LineProfile, LineSettings
    from .result import WindResult

__all__ = ["plot_profile", "plot_sweep", "plot_line", "plot_residuals", "plot_chi2",
           "sweep_figure", "line_figure", "chi2_figure", "check_line", "label_log_ticks",
           "MAX_FACETS", "MIN_TICK_LABELS"]

MAX_FACETS = 12  # facets (rows of panels) a sweep figure draws for its third and further axes
RANGE_FACETS = 4  # facets of ranges of the third axis when its values are too many
MIN_TICK_LABELS = 3  # labelled ticks on every log axis, however short its span
MAX_TICK_LABELS = 12
FAILED_COLOR = "0.55"


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


# -- axes: plain numbers, labelled log ticks, legends outside ---------------------------

def _exponent(values) -> int:
    """The power of ten an axis divides its values by (0: plain numbers are short enough)."""
    a = np.abs(np.asarray(values, dtype=float))
    a = a[np.isfinite(a) & (a > 0)]
    if not a.size:
        return 0
    k = int(np.floor(np.log10(a.max())))
    return k if (k >= 4 or k <= -3) else 0


def _scaled(values, key: str, unit: str):
    """(values / 10^k, label): the scale, when there is one, stated in the label's unit."""
    k = _exponent(values)
    scale = f"10$^{{{k}}}$" if k else ""
    inside = " ".join(part for part in (scale, unit) if part)
    label = f"{key} [{inside}]" if inside else key
    return np.asarray(values, dtype=float) / 10.0 ** k, label


def _tick_text(x, pos=None) -> str:
    """A tick label: %g, with an exponent as 10^k (never 'e+06')."""
    text = f"{x:.6g}"
    if "e" in text:
        mant, exp = text.split("e")
        exp = int(exp)
        return f"$10^{{{exp}}}$" if mant == "1" else f"${mant}\\times10^{{{exp}}}$"
    return text


def label_log_ticks(ax: "object", which: str) -> None:
    """Ticks of an axis labelled as plain numbers; a log axis gets at least three labels.

    On a linear axis: plain numbers, no offset and no "1e6" multiplier text
    (scale the values first, as :func:`_scaled` does, when they are large).
    On a log axis: the first of decades, 1-2-5, 1...9 or evenly spaced
    values that puts between :data:`MIN_TICK_LABELS` and 12 labelled ticks
    inside the current limits, so an axis spanning less than a decade is
    still readable.  Call it after the limits are final.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        The axes.
    which : str
        ``"x"`` or ``"y"``.

    Returns
    -------
    None
    """
    from matplotlib import ticker

    axis = ax.xaxis if which == "x" else ax.yaxis
    if axis.get_scale() != "log":
        if axis.get_scale() == "linear":
            formatter = ticker.ScalarFormatter(useOffset=False)
            formatter.set_scientific(False)
            axis.set_major_formatter(formatter)
        return
    lo, hi = sorted(getattr(ax, f"get_{which}lim")())
    if not (lo > 0 and hi > lo and np.isfinite(hi)):
        return
    decades = np.log10(hi / lo)
    plain = ticker.FuncFormatter(_tick_text)
    every = ticker.LogLocator(subs="auto")
    candidates = []
    if decades >= 2:
        candidates.append((ticker.LogLocator(numticks=MAX_TICK_LABELS),
                           ticker.LogFormatterSciNotation(), every))
    candidates += [
        (ticker.LogLocator(subs=(1.0, 2.0, 5.0), numticks=MAX_TICK_LABELS), plain, every),
        (ticker.LogLocator(subs=tuple(range(1, 10)), numticks=MAX_TICK_LABELS), plain,
         ticker.NullLocator()),
        (ticker.MaxNLocator(nbins=5, steps=[1, 2, 2.5, 5, 10]), plain, ticker.NullLocator()),
        (ticker.MaxNLocator(nbins=9, steps=[1, 2, 2.5, 5, 10]), plain, ticker.NullLocator()),
    ]
    chosen = candidates[-1]
    for candidate in candidates:  # the first that labels 3 to 12 ticks on this axis
        axis.set_major_locator(candidate[0])
        locs = np.asarray(axis.get_majorticklocs())
        locs = locs[(locs >= lo * (1 - 1e-9)) & (locs <= hi * (1 + 1e-9)) & (locs > 0)]
        if isinstance(candidate[0], ticker.LogLocator):
            # on a short span LogLocator falls back to linear ticks of its own: keep it only
            # when its ticks are the whole multiples of powers of ten it was asked for
            mantissa = locs / 10.0 ** np.floor(np.log10(locs) + 1e-9)
            if not np.allclose(mantissa, np.round(mantissa), rtol=0, atol=1e-6):
                continue
        if MIN_TICK_LABELS <= locs.size <= MAX_TICK_LABELS:
            chosen = candidate
            break
    major, formatter, minor = chosen
    axis.set_major_locator(major)
    axis.set_major_formatter(formatter)
    axis.set_minor_locator(minor)
    axis.set_minor_formatter(ticker.NullFormatter())


def _all_ticks(fig):
    """label_log_ticks on both axes of every axes of the figure (colour bars excepted)."""
    for ax in fig.axes:
        if ax.get_label() == "<colorbar>" or not ax.get_visible():
            continue
        for which in "xy":
            label_log_ticks(ax, which)


def _plain_colorbar(cb):
    """A colour bar labelled in plain numbers (no offset or multiplier text)."""
    from matplotlib import ticker
    formatter = ticker.ScalarFormatter(useOffset=False)
    formatter.set_scientific(False)
    cb.formatter = formatter
    cb.update_ticks()
    return cb


def _legend_outside(fig, axes, ncols=3):
    """One legend for the figure, below every axes (it can cover no data)."""
    seen = {}
    for ax in axes:
        for handle, label in zip(*ax.get_legend_handles_labels(), strict=True):
            if label and not label.startswith("_"):
                seen.setdefault(label, handle)
    if seen:
        fig.legend(list(seen.values()), list(seen), loc="outside lower center",
                   ncols=min(ncols, len(seen)), frameon=False, fontsize=9)


def plot_profile(result: "WindResult", path: "str | Path | None" = None) -> "Figure":
    """Velocity, density, Eddington factor and luminosity against radius.

    The sonic (critical) point is marked in every panel; Model B results add
    temperature and optical depth.  A result that did not converge but holds
    a profile is drawn grey, marked "NOT A SOLUTION" with its status and
    message in every panel and the title.

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
    plt = pyplot()

    p = result.profile
    if not p or len(p.get("radius", [])) == 0:
        raise OutputError(f"nothing to plot: the result has no profile ({result.message})")
    failed = not result.converged
    r = p["radius"].to_value(u.Rsun)
    rc = result.summary.get("sonic_radius", np.nan * u.cm).to_value(u.Rsun)
    panels = [
        ("velocity", u.km / u.s, "velocity  v", "km s$^{-1}$", "linear"),
        ("density", u.g / u.cm**3, r"density  $\rho$", "g cm$^{-3}$", "log"),
        ("eddington_factor", u.one, r"Eddington factor  $\Gamma_{\rm eff}$", "", "linear"),
        ("luminosity", u.Lsun, r"luminosity  $L$", r"L$_\odot$", "linear"),
    ]
    if "optical_depth" in p:
        panels.append(("temperature", u.K, "temperature  T", "K", "log"))
        panels.append(("optical_depth", u.one, r"optical depth  $\tau$", "", "log"))
    # A file written by another program may hold only radius, velocity and density.
    panels = [panel for panel in panels if panel[0] in p]
    ncols = 2
    nrows = (len(panels) + 1) // 2
    fig, axes = plt.subplots(nrows, ncols, figsize=(10, 3.2 * nrows + 0.6), sharex=True,
                             constrained_layout=True, squeeze=False)
    for ax in axes.flat[len(panels):]:
        ax.set_visible(False)
    color = FAILED_COLOR if failed else "#1f4e79"
    for ax, (key, unit, name, unit_text, scale) in zip(axes.flat, panels, strict=False):
        y = p[key].to_value(unit)
        if scale == "linear":
            y, label = _scaled(y, name, unit_text)
        else:
            label = f"{name}  [{unit_text}]" if unit_text else name
        ax.plot(r, y, color=color, lw=1.6, ls="--" if failed else "-",
                label="not converged (not a solution)" if failed else "wind profile")
        ax.set_xscale("log")
        ax.set_yscale(scale)
        ax.set_ylabel(label)
        ax.grid(True, which="both", alpha=0.25)
        if np.isfinite(rc):
            ax.axvline(rc, color="#b03a2e", ls="--", lw=1.0, label="sonic point")
            if key == "velocity" and "sonic_velocity" in result.summary:
                a = result.summary["sonic_velocity"].to_value(u.km / u.s)
                ax.plot([rc], [a], "o", color="#b03a2e", ms=5, label="sonic point")
        if key == "eddington_factor":
            ax.axhline(1.0, color="0.5", lw=0.8, ls=":", label=r"$\Gamma_{\rm eff}$ = 1")
        rph = result.summary.get("photosphere_radius")
        if rph is not None and np.isfinite(rph.value):
            ax.axvline(rph.to_value(u.Rsun), color="#7d3c98", ls="-.", lw=1.0,
                       label="photosphere")
        if failed:
            ax.text(0.5, 0.5, f"NOT A SOLUTION\n({result.status})", transform=ax.transAxes,
                    ha="center", va="center", color="#b03a2e", alpha=0.35, fontsize=16,
                    fontweight="bold")
    for ax in axes[-1]:
        ax.set_xlabel(r"radius  r  [R$_\odot$]")
    _legend_outside(fig, axes.flat[:len(panels)], ncols=4)
    _all_ticks(fig)
    name = getattr(result.model, "name", "") if result.model is not None else ""
    mdot = result.summary.get("mass_loss_rate", np.nan * u.g / u.s).to_value(u.Msun / u.yr)
    if failed:
        fig.suptitle(f"NOT A SOLUTION — {name}: status {result.status}\n{result.message}",
                     color="#b03a2e", fontsize=10)
    else:
        fig.suptitle(f"{name} — {result.model.kind if result.model else ''} wind, "
                     f"Ṁ = {mdot:.3g} M$_\\odot$/yr  ({result.status})")
    if path is not None:
        save(plt, fig, path)
    return fig


# -- sweeps ------------------------------------------------------------------------------

_QUANTITIES = ((r"mass-loss rate  $\dot M$", r"M$_\odot$ yr$^{-1}$", True),
               (r"terminal velocity  $v_\infty$", "km s$^{-1}$", False))


def _sweep_quantities(kind):
    """_QUANTITIES with the speed named as the model's summary names it (Model A: v at
    the outer radius, not v_inf; ModelSpec.terminal_label)."""
    from .registry import MODEL_SPECS
    spec = MODEL_SPECS.get(kind)
    label = spec.terminal_label if spec is not None else "terminal velocity"
    if label == "terminal velocity":
        return _QUANTITIES
    return _QUANTITIES[0], (label, _QUANTITIES[1][1], False)


def _facets(table, views):
    """(titles, index, note): the facets of a sweep of three or more axes.

    One facet per distinct value (combination) of the third and further axes, in the
    sweep's order, when there are at most MAX_FACETS.  More (a random or latin design,
    whose values never repeat): up to RANGE_FACETS facets of equal-count ranges of the
    third axis, when no two rows of a facet share a point of the first two axes (every
    row stays visible); else the first MAX_FACETS values, and the note says how many
    values and rows are left out.  ``index`` gives each table row its facet (-1: not drawn).
    """
    extra = np.column_stack([table[v.key] * v.factor for v in views[2:]])
    keys = ", ".join(v.key for v in views[2:])
    combos, first, inverse = np.unique(extra, axis=0, return_index=True, return_inverse=True)
    order = np.argsort(first)  # first-seen order: the sweep's own order
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    index = rank[np.ravel(inverse)]
    combos = combos[order]
    if len(combos) <= MAX_FACETS:
        return ([_value_text(views[2:], c) for c in combos], index,
                f"one row of panels per value of {keys}: every row of the sweep drawn")
    third = extra[:, 0]
    n_bins = min(RANGE_FACETS, MAX_FACETS)
    edges = np.unique(np.quantile(third, np.linspace(0.0, 1.0, n_bins + 1)))
    bins = np.clip(np.searchsorted(edges, third, side="right") - 1, 0, len(edges) - 2)
    points = np.column_stack([table[v.key] for v in views[:2]])
    if all(len(np.unique(points[bins == b], axis=0)) == int(np.sum(bins == b))
           for b in range(len(edges) - 1)):
        view = views[2]
        titles = []
        for b in range(len(edges) - 1):
            vals = third[bins == b]
            k = _exponent(vals)
            unit = (f" 10$^{{{k}}}$" if k else "") + (f" {view.unit}" if view.unit else "")
            titles.append(f"{view.key} {vals.min() / 10.0 ** k:.4g} to "
                          f"{vals.max() / 10.0 ** k:.4g}{unit} ({vals.size} rows)")
        rest = (f"; {', '.join(v.key for v in views[3:])} not separated within a panel"
                if len(views) > 3 else "")
        return (titles, bins,
                f"one row of panels per range of {view.key} ({len(combos)} values, too many "
                f"for a row each): every row of the sweep drawn{rest}")
    left = int(np.sum(index >= MAX_FACETS))
    index = np.where(index < MAX_FACETS, index, -1)
    return ([_value_text(views[2:], c) for c in combos[:MAX_FACETS]], index,
            f"showing {MAX_FACETS} of {len(combos)} values of {keys} (one row each); "
            f"{len(combos) - MAX_FACETS} values ({left} rows) not drawn")


def _value_text(views, values):
    parts = []
    for view, x in zip(views, values, strict=True):
        k = _exponent([x])
        text = _tick_text(x / 10.0 ** k) + (f"×10$^{{{k}}}$" if k else "")
        parts.append(f"{view.key} = {text}" + (f" {view.unit}" if view.unit else ""))
    return ", ".join(parts)


def sweep_figure(path: "str | Path") -> "Figure":
    """Mdot and v_inf over a sweep: against one axis, colour maps over two, facets beyond.

    One axis: Mdot and v_inf against it.  Two: colour maps over them.  Three
    or more: one row of colour maps per distinct value (combination) of the
    further axes, one colour scale per quantity for all rows.  More than
    :data:`MAX_FACETS` values (a random or latin design): one row per range
    of the third axis (:data:`RANGE_FACETS` ranges of equal counts) when no
    two rows of a range share a point of the first two axes; else the first
    :data:`MAX_FACETS` values, the title saying how many values and rows are
    not drawn.  Failed models are grey crosses,
    counted in the title; each axis is in the unit the sweep file wrote it in
    (:func:`windsolve.sweep.axis_views`), divided by a power of ten that its
    label states when the numbers are long.

    Parameters
    ----------
    path : str or Path
        A sweep output file (HDF5).

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    OutputError
        The sweep file cannot be read.
    """
    from matplotlib.colors import Normalize

    plt = pyplot()

    from .sweep import axis_views, read_sweep_table

    table, attrs = read_sweep_table(path)
    quantities = _sweep_quantities(str(attrs.get("model", "")))
    views = axis_views(path)
    ok = table["converged"].astype(bool)
    mdot = table["mass_loss_rate"] * (u.g / u.s).to(u.Msun / u.yr)
    vinf = table["terminal_velocity"] / 1e5
    n_bad = int((~ok).sum())
    axis = [_scaled(table[v.key] * v.factor, v.key, v.unit) for v in views]
    title = (f"sweep {attrs.get('sweep_file', '')}: {ok.sum()} solutions"
             + (f", {n_bad} without (x)" if n_bad else ""))

    if len(views) == 1:
        fig, axs = plt.subplots(1, 2, figsize=(11, 4.6), constrained_layout=True)
        x, xlabel = axis[0]
        for ax, (name, unit, logy), y in zip(axs, quantities, (mdot, vinf), strict=True):
            order = np.argsort(x)
            good = order[ok[order]]
            if logy and ok.any() and np.all(y[ok] > 0):
                ax.set_yscale("log")
                label = f"{name}  [{unit}]"
            else:
                y, label = _scaled(y, name, unit)
            ax.plot(x[good], y[good], "o-", ms=3, color="#1f4e79", label="solution")
            if n_bad:
                ymin = np.nanmin(y[ok]) if ok.any() else 1.0
                ax.plot(x[~ok], np.full(n_bad, ymin), "x", color=FAILED_COLOR,
                        label="no solution (drawn at the lowest value)")
            ax.set_xlabel(xlabel)
            ax.set_ylabel(label)
            if views[0].log:
                ax.set_xscale("log")
            ax.grid(True, which="both", alpha=0.25)
        _legend_outside(fig, axs)
        _all_ticks(fig)
        fig.suptitle(title)
        return fig

    (x, xlabel), (y, ylabel) = axis[0], axis[1]
    if len(views) == 2:
        index = np.zeros(len(ok), dtype=int)
        titles, note = [""], ""
    else:
        titles, index, note = _facets(table, views)
    shown = len(titles)
    fig, axs = plt.subplots(shown, 2, figsize=(11, 1.2 + 3.3 * shown), squeeze=False,
                            sharex=True, sharey=True, constrained_layout=True)
    colours = []
    for name, unit, logz in quantities:
        z = mdot if logz else vinf
        if logz and ok.any() and np.all(z[ok] > 0):
            colours.append((np.log10(z), f"log$_{{10}}$ {name}  [{unit}]"))
        else:
            colours.append(_scaled(z, name, unit))
    for j, (z, zlabel) in enumerate(colours):
        zs = z[ok]
        norm = Normalize(*(float(zs.min()), float(zs.max())) if zs.size else (0.0, 1.0))
        sc = None
        for i in range(shown):
            ax = axs[i, j]
            here = index == i
            sc = ax.scatter(x[here & ok], y[here & ok], c=z[here & ok], cmap="viridis",
                            norm=norm, s=36, marker="s")
            if (here & ~ok).any():
                ax.scatter(x[here & ~ok], y[here & ~ok], marker="x", color=FAILED_COLOR, s=30,
                           label="no solution")
            if views[0].log:
                ax.set_xscale("log")
            if views[1].log:
                ax.set_yscale("log")
            if titles[i]:
                ax.set_title(titles[i], fontsize=9)
            if i == shown - 1:
                ax.set_xlabel(xlabel)
            if j == 0:
                ax.set_ylabel(ylabel)
        _plain_colorbar(fig.colorbar(sc, ax=axs[:, j])).set_label(zlabel)
    if note:
        title += "\n" + note
    _legend_outside(fig, axs.flat)
    _all_ticks(fig)
    fig.suptitle(title)
    return fig


def plot_sweep(path: "str | Path", out: "str | Path") -> "str | Path":
    """Write :func:`sweep_figure` of a sweep file.

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
    fig = sweep_figure(path)
    return save(pyplot(), fig, out)


# -- line profiles -----------------------------------------------------------------------

def _speed(x):
    """km/s for a label: whole numbers, or three digits below 10."""
    return f"{x:.0f}" if abs(x) >= 10 else f"{x:.3g}"


LINE_KINDS = {"emission": "optically thin emission line", "pcygni": "P Cygni line (Sobolev)"}
LINE_YLABEL = {"emission": "F / F$_{\\rm peak}$  (continuum 0, line peak 1)",
               "pcygni": "F / F$_{\\rm c}$  (continuum = 1)"}


def check_line(line: "LineProfile") -> None:
    """Refuse a line profile that is not a consistent solution (one line).

    Checked: a known kind; velocity and flux of one length (>= 2), finite,
    the velocities increasing; an emission line normalised as documented
    (flux >= 0, peak <= 1, continuum 0 at both ends) and a P Cygni line
    too (flux >= 0, continuum 1 at both ends; docs/lines.md,
    "Normalisation").

    Parameters
    ----------
    line : LineProfile
        The profile to check.

    Returns
    -------
    None

    Raises
    ------
    ModelError
        One line saying what is wrong and that nothing is plotted.
    """
    from .errors import ModelError

    def refuse(why):
        raise ModelError(f"not plotting the {getattr(line, 'kind', '?')} line: {why}; "
                         f"it is not a solution to draw")

    if line.kind not in LINE_KINDS:
        refuse(f"its kind is {line.kind!r}, not 'emission' or 'pcygni'")
    try:
        w = np.asarray(line.velocity.to_value(u.km / u.s), dtype=float)
    except (AttributeError, u.UnitsError):
        refuse("its velocity is not a Quantity of speed")
    f = np.asarray(line.flux, dtype=float)
    if w.ndim != 1 or f.shape != w.shape or w.size < 2:
        refuse(f"velocity and flux differ in shape or hold fewer than 2 points "
               f"({w.shape}, {f.shape})")
    bad = int(np.sum(~np.isfinite(f)) + np.sum(~np.isfinite(w)))
    if bad:
        refuse(f"{bad} values are not finite (NaN or inf)")
    if not np.all(np.diff(w) > 0):
        refuse("its velocities do not increase")
    tol = 1e-6
    if f.min() < -tol:
        refuse(f"its flux falls below zero (to {f.min():.3g})")
    if line.kind == "emission":
        if f.max() > 1 + tol:
            refuse(f"its peak is {f.max():.6g}, not 1 (F / F_peak)")
        if max(abs(f[0]), abs(f[-1])) > 1e-3:
            refuse(f"its ends are at {f[0]:.3g} and {f[-1]:.3g}, not at the continuum 0")
    elif max(abs(f[0] - 1), abs(f[-1] - 1)) > 1e-3:
        refuse(f"its ends are at {f[0]:.4g} and {f[-1]:.4g}, not at the continuum 1 "
               f"(F / F_c)")


def _settings_box(settings, kind):
    """The line settings, one per line (shown beside the profile)."""
    res = settings.resolution
    if res is None:
        res_text = "none"
    elif isinstance(res, float):
        res_text = f"R = {res:g}"
    else:
        res_text = f"{res.to_value(u.km / u.s):g} km/s FWHM"
    rows = ["line settings",
            f"occultation {'on' if settings.occultation else 'off'}",
            f"turbulence {settings.turbulence.to_value(u.km / u.s):g} km/s FWHM",
            f"resolution {res_text}",
            f"Gaussian FWHM {settings.broadening_fwhm.to_value(u.km / u.s):.4g} km/s"]
    if kind == "emission":
        rows += [f"emissivity ∝ ρ$^{settings.emissivity_power}$",
                 f"HWZI level {settings.hwzi_fraction:g} × peak"]
    else:
        rows += [f"line strength $k_0$ = {settings.line_strength:g}",
                 f"edge depth {settings.edge_depth:g}"]
    rows.append(f"{settings.n_velocity} velocity points")
    return "\n".join(rows)


def _line_ends(w, f, level, measured):
    """(blue, red, note): where the plotted line falls to ``level`` at either end.

    The crossings are :func:`windsolve.core.lines.outermost_crossings` of the
    plotted profile, the function the HWZI measurement uses.  The end that
    gives the measured HWZI (max(-w_blue, w_red)) is put at exactly
    -HWZI or +HWZI: measured on the exact, unsampled profile (no broadening)
    it may lie up to a grid step from the grid crossing.  An end the grid
    does not resolve is NaN, and ``note`` says so."""
    from .core.lines import outermost_crossings

    blue, red = outermost_crossings(np.ascontiguousarray(w, dtype=np.float64),
                                    np.ascontiguousarray(f, dtype=np.float64), float(level))
    blue, red = float(blue), float(red)
    if np.isfinite(measured):
        if not np.isfinite(red) or (np.isfinite(blue)
                                    and abs(-blue - measured) <= abs(red - measured)):
            blue = -measured
        else:
            red = measured
    note = ""
    if not np.isfinite(red):
        note = "red end not resolved by the velocity grid"
    return blue, red, note


def line_figure(line: "LineProfile", settings: "LineSettings | None" = None,
                title: str = "") -> "Figure":
    """A synthetic line profile, its measured widths, and the settings that made it.

    The y axis says the normalisation (emission F / F_peak, continuum 0;
    P Cygni F / F_c, continuum 1).  Marked: the FWHM between the outermost
    half-maximum crossings; the two ends of the line at the HWZI level,
    where the measurement found them (with occultation the red end lies
    short of -(blue end)); the HWZI level itself; the P Cygni blue edge and
    the absorption depth that defines it.  The values go in the legend,
    below the axes; the line settings in a box beside them.

    Parameters
    ----------
    line : LineProfile
        The profile (:func:`windsolve.lines.emission_profile` or
        :func:`windsolve.lines.pcygni_profile`).
    settings : LineSettings or None
        The settings the profile was computed with; None: the default
        ``LineSettings()``, the default of those functions.
    title : str
        Title text before the line's kind.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    ModelError
        The profile is not a consistent solution (:func:`check_line`).
    """
    from .lines import LineSettings

    check_line(line)
    settings = LineSettings() if settings is None else settings
    plt = pyplot()
    fig, ax = plt.subplots(figsize=(9, 5.2), constrained_layout=True)
    w = np.asarray(line.velocity.to_value(u.km / u.s), dtype=float)
    f = np.asarray(line.flux, dtype=float)
    ax.plot(w, f, color="#1f4e79", lw=1.6, label="profile")
    ax.set_xlabel(r"velocity  [km s$^{-1}$]  (negative: towards the observer)")
    ax.set_ylabel(LINE_YLABEL[line.kind])
    ax.grid(True, alpha=0.25)
    ax.axhline(0.0 if line.kind == "emission" else 1.0, color="0.4", lw=0.8,
               label="continuum")
    fwhm = line.fwhm.to_value(u.km / u.s)
    hwzi = line.hwzi.to_value(u.km / u.s)
    edge = line.edge_velocity.to_value(u.km / u.s)
    if line.kind == "emission":
        ax.set_ylim(-0.04, 1.08)  # peak 1 by definition, even where the grid misses it
        if np.isfinite(fwhm):
            lo, _ = _line_ends(w, f, 0.5, np.nan)[:2]
            w_lo = lo if np.isfinite(lo) else w[int(np.argmax(f))] - 0.5 * fwhm
            ax.plot([w_lo, w_lo + fwhm], [0.5, 0.5], "-", marker="|", ms=12, color="#b03a2e",
                    lw=1.2, label=f"FWHM {_speed(fwhm)} km/s (at half the peak)")
        else:
            ax.plot([], [], " ", label="FWHM not measurable")
        level = settings.hwzi_fraction
        if np.isfinite(hwzi):
            blue, red, note = _line_ends(w, f, level, hwzi)
            ends = [x for x in (blue, red) if np.isfinite(x)]
            ax.axhline(level, color="#7d3c98", ls=":", lw=0.9,
                       label=f"HWZI level: {level:g} of the peak")
            ax.vlines(ends, -0.04, level, color="#7d3c98", lw=1.4)
            ax.plot(ends, [level] * len(ends), "D", color="#7d3c98", ms=5,
                    label=(f"line ends {_speed(blue)}" + (f" and +{_speed(red)}"
                                                          if np.isfinite(red) else "")
                           + f" km/s: HWZI {_speed(hwzi)} km/s"
                           + (f" ({note})" if note else "")))
        else:
            ax.plot([], [], " ", label=f"HWZI not measurable at {level:g} of the peak")
    else:
        depth = settings.edge_depth
        ax.axhline(1.0 - depth, color="#196f3d", ls=":", lw=0.9,
                   label=f"edge depth {depth:g} (F / F$_{{\\rm c}}$ = {1 - depth:g})")
        if np.isfinite(edge):
            ax.axvline(edge, color="#196f3d", ls="--", lw=1.2,
                       label=f"blue edge {_speed(edge)} km/s")
        else:
            ax.plot([], [], " ", label=f"blue edge not reached at depth {depth:g}")
    ax.text(1.02, 1.0, _settings_box(settings, line.kind), transform=ax.transAxes,
            ha="left", va="top", fontsize=8, family="monospace",
            bbox=dict(boxstyle="round", fc="0.97", ec="0.6"))
    _legend_outside(fig, [ax], ncols=2)
    ax.set_title(f"{title} — {LINE_KINDS[line.kind]}".strip(" —"))
    return fig


def plot_line(line: "LineProfile", path: "str | Path", title: str = "",
              settings: "LineSettings | None" = None) -> "str | Path":
    """Write :func:`line_figure` of a line profile.

    Parameters
    ----------
    line : LineProfile
        The profile (:func:`windsolve.lines.emission_profile` or
        :func:`windsolve.lines.pcygni_profile`).
    path : str or Path
        The picture to write (format by extension).
    title : str
        Title text before the line's kind.
    settings : LineSettings or None
        The settings the profile was computed with (None: the default).

    Returns
    -------
    str or Path
        ``path``.

    Raises
    ------
    ModelError
        The profile is not a consistent solution (nothing is written).
    OutputError
        The picture cannot be written.
    """
    fig = line_figure(line, settings, title)
    return save(pyplot(), fig, path)


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


# -- chi^2 ---------------------------------------------------------------------------------

SIGMA_STYLES = {1: "-", 2: "--", 3: ":"}


def chi2_figure(table: dict, views: list, chi2: np.ndarray,
                regions: "dict | None" = None) -> "Figure":
    """chi^2 against one axis, or its map over the first two, with the confidence regions.

    One axis: chi^2 per row and the levels chi^2_min + Delta chi^2 (one
    parameter of interest) as horizontal lines.  Two or more: the profile
    chi^2 (its minimum over every further axis at each point of the first
    two, from :func:`windsolve.observe.chi2_map`) coloured as
    log10(1 + Delta chi^2), the Delta chi^2 contours of the joint region of
    two parameters, the best row starred.  The title states the number of
    free parameters (the sweep's axes) and the Delta chi^2 of each contour.

    Parameters
    ----------
    table : dict of ndarray
        The sweep table (:func:`windsolve.sweep.read_sweep_table`), cgs columns.
    views : list of AxisView
        :func:`windsolve.sweep.axis_views` (each axis in the unit the sweep file
        wrote it in, on a log scale if it was log-spaced).
    chi2 : ndarray
        chi^2 per row (docs/physics.md, eq. 31); NaN for rows not compared.
    regions : dict or None
        The confidence regions: ``n_params`` (parameters of interest),
        ``levels`` (sigma -> chi^2 value of the region's edge) and, for two or
        more axes, the profile map ``x``, ``y``, ``chi2`` of
        :func:`windsolve.observe.chi2_map` (its whole output will do).  None:
        no regions drawn, which the title says.

    Returns
    -------
    matplotlib.figure.Figure
    """
    ok = np.isfinite(chi2)
    plt = pyplot()
    fig, ax = plt.subplots(figsize=(8, 6), constrained_layout=True)
    p = len(views)
    x, xlabel = _scaled(table[views[0].key] * views[0].factor, views[0].key, views[0].unit)
    kx = _exponent(table[views[0].key] * views[0].factor)
    lo = float(np.nanmin(chi2)) if ok.any() else np.nan
    levels = dict(sorted((regions or {}).get("levels", {}).items()))
    n_interest = (regions or {}).get("n_params")
    best = int(np.nanargmin(chi2)) if ok.any() else None
    if p == 1:
        order = np.argsort(x)
        good = order[ok[order]]
        ax.plot(x[good], chi2[good], "o-", ms=3, color="#1f4e79", label=r"$\chi^2$ per row")
        if (~ok).any():
            ax.plot(x[~ok], np.full((~ok).sum(), lo if ok.any() else 1.0), "x",
                    color=FAILED_COLOR, label="not compared (drawn at the minimum)")
        for s, level in levels.items():
            ax.axhline(level, color="#b03a2e", ls=SIGMA_STYLES.get(s, "-."), lw=1,
                       label=f"{s:g}σ: Δχ² = {level - lo:.3g}")
        if ok.any() and np.all(chi2[ok] > 0):
            ax.set_yscale("log")
        else:  # an exact fit has chi^2 = 0
            ax.set_yscale("symlog", linthresh=1.0)
        ax.set_ylabel(r"$\chi^2$")
    else:
        y, ylabel = _scaled(table[views[1].key] * views[1].factor, views[1].key,
                            views[1].unit)
        ky = _exponent(table[views[1].key] * views[1].factor)
        if regions is not None and "chi2" in regions:
            gx = np.asarray(regions["x"], dtype=float) / 10.0 ** kx
            gy = np.asarray(regions["y"], dtype=float) / 10.0 ** ky
            grid = np.asarray(regions["chi2"], dtype=float)
        else:  # no profile given: every compared row at its point
            gx, gy, grid = x[ok], y[ok], None
        if grid is not None:
            X, Y = np.meshgrid(gx, gy)
            finite = np.isfinite(grid)
            px, py, pz = X[finite], Y[finite], grid[finite]
        else:
            px, py, pz = gx, gy, chi2[ok]
        sc = ax.scatter(px, py, c=np.log10(1.0 + pz - lo), cmap="viridis_r", s=40,
                        marker="s", label="compared" if p == 2 else
                        f"best over {', '.join(v.key for v in views[2:])}")
        cb = _plain_colorbar(fig.colorbar(sc, ax=ax))
        cb.set_label(r"log$_{10}$(1 + Δχ²),  Δχ² = χ² − χ²$_{\rm min}$")
        if (~ok).any():
            ax.scatter(x[~ok], y[~ok], marker="x", color=FAILED_COLOR, s=30,
                       label="not compared (no solution or a measurement undefined)")
        if levels:
            _contours(ax, gx, gy, grid, px, py, pz, levels, lo)
        ax.plot(x[best], y[best], "*", color="#b03a2e", ms=14,
                label=f"best: χ²$_{{\\rm min}}$ = {lo:.3g}")
        if views[1].log:
            ax.set_yscale("log")
        ax.set_ylabel(ylabel)
    if views[0].log:
        ax.set_xscale("log")
    ax.use_sticky_edges = False  # contour() fits the limits tightly: the edge points were cut
    ax.margins(0.05)
    ax.autoscale_view()
    ax.set_xlabel(xlabel)
    _legend_outside(fig, [ax], ncols=2)
    _all_ticks(fig)
    keys = ", ".join(v.key for v in views)
    text = (f"{ok.sum()} rows compared, {(~ok).sum()} not; {p} free parameter"
            f"{'s' if p != 1 else ''} ({keys})")
    if levels:
        deltas = ", ".join(f"{level - lo:.3g}" for level in levels.values())
        sig = ", ".join(f"{s:g}σ" for s in levels)
        shape = "lines" if p == 1 else "contours"
        text += (f"\n{shape} {sig}: Δχ² = {deltas} for {n_interest} parameter"
                 f"{'s' if n_interest != 1 else ''} of interest")
    else:
        text += "\nno confidence regions drawn"
    if p > 2:
        text += f"\nχ² minimised over {', '.join(v.key for v in views[2:])} at each point"
    ax.set_title(text, fontsize=9)
    return fig


def _contours(ax, gx, gy, grid, px, py, pz, levels, lo):
    """The Delta chi^2 contours: on the profile grid when it is mostly filled, else on the
    triangulated points (a random or latin design)."""
    values = list(levels.values())
    styles = [SIGMA_STYLES.get(s, "-.") for s in levels]
    cs = None
    if grid is not None and grid.shape[0] >= 2 and grid.shape[1] >= 2 \
            and np.isfinite(grid).mean() >= 0.5:
        cs = ax.contour(gx, gy, np.ma.masked_invalid(grid), levels=values, colors="#b03a2e",
                        linestyles=styles, linewidths=1.2)
    elif len(px) >= 3:
        try:
            cs = ax.tricontour(px, py, pz, levels=values, colors="#b03a2e",
                               linestyles=styles, linewidths=1.2)
        except (ValueError, RuntimeError):  # the points lie on a line: no triangles
            cs = None
    for s, style, level in zip(levels, styles, values, strict=True):
        ax.plot([], [], color="#b03a2e", ls=style, label=f"{s:g}σ region: Δχ² = {level - lo:.3g}")
    return cs


def plot_chi2(table: dict, views: list, chi2: np.ndarray, path: "str | Path",
              regions: "dict | None" = None) -> "str | Path":
    """Write :func:`chi2_figure`.

    Parameters
    ----------
    table : dict of ndarray
        The sweep table, cgs columns.
    views : list of AxisView
        :func:`windsolve.sweep.axis_views`.
    chi2 : ndarray
        chi^2 per row (docs/physics.md, eq. 31); NaN for rows not compared.
    path : str or Path
        The picture to write (format by extension).
    regions : dict or None
        As for :func:`chi2_figure`.

    Returns
    -------
    str or Path
        ``path``.

    Raises
    ------
    OutputError
        The picture cannot be written.
    """
    fig = chi2_figure(table, views, chi2, regions)
    return save(pyplot(), fig, path)
