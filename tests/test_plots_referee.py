"""Plots a referee would accept (issue 12, item 4), checked on the Figure objects.

Every figure is built through the public builders of windsolve.plotting (``line_figure``,
``sweep_figure``, ``chi2_figure``, ``plot_profile``) from real solutions of the invented demo
star, then drawn with Agg and inspected: axis labels, texts, tick labels, legend boxes
against the plotted data in display coordinates, the number of panels, contour levels.
Reference values come from outside windsolve: the Delta chi^2 levels from
scipy.stats.chi2.ppf, the speed of light from scipy.constants, the ends of a line from
np.interp on the plotted arrays (written out here, not windsolve's crossing kernel).
"""

import dataclasses

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pytest
import scipy.constants
import scipy.stats

from windsolve import cli, demo_model_path
from windsolve.errors import ModelError
from windsolve.lines import LineSettings, emission_profile, pcygni_profile
from windsolve.observe import chi2_map, compare_table, read_observed
from windsolve.plotting import (
    MIN_TICK_LABELS,
    chi2_figure,
    label_log_ticks,
    line_figure,
    plot_line,
    plot_profile,
    pyplot,
    sweep_figure,
)
from windsolve.sweep import axis_views, load_sweep, read_sweep_table, run_sweep

DEMO = demo_model_path()


def run(tmp_path, name, axes):
    path = tmp_path / f"{name}.toml"
    path.write_text(f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n' + axes)
    out = tmp_path / f"{name}.h5"
    run_sweep(load_sweep(path), out, workers=1, quiet=True)
    return out


LUM4 = '[[axis]]\nkey = "star.luminosity"\nstart = "3.5e6 Lsun"\nstop = "4.5e6 Lsun"\nnum = 4\n'
SOUND2 = '[[axis]]\nkey = "gas.sound_speed"\nvalues = ["19 km/s", "21 km/s"]\n'
POROSITY2 = '[[axis]]\nkey = "porosity.length"\nvalues = ["5 Rsun", "20 Rsun"]\n'


@pytest.fixture(scope="module")
def sweeps(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("referee")
    # one axis with a row that fails (1e5 Lsun: no critical point inside the outer radius)
    one = run(tmp, "one", '[[axis]]\nkey = "star.luminosity"\n'
                          'values = ["1e5 Lsun", "3.5e6 Lsun", "4e6 Lsun", "4.5e6 Lsun"]\n')
    two = run(tmp, "two", LUM4 + SOUND2)
    three = run(tmp, "three", LUM4 + SOUND2 + POROSITY2)
    path = tmp / "random.toml"  # a random design: no value of an axis repeats
    path.write_text(f'[sweep]\nbase = "{DEMO}"\ndesign = "random"\nsamples = 16\nseed = 5\n'
                    '[[axis]]\nkey = "star.luminosity"\nstart = "3.5e6 Lsun"\n'
                    'stop = "4.5e6 Lsun"\n[[axis]]\nkey = "gas.sound_speed"\n'
                    'start = "19 km/s"\nstop = "21 km/s"\n[[axis]]\nkey = "porosity.length"\n'
                    'start = "5 Rsun"\nstop = "20 Rsun"\n')
    random = tmp / "random.h5"
    run_sweep(load_sweep(path), random, workers=1, quiet=True)
    return {"one": one, "two": two, "three": three, "random": random}


def drawn(fig):
    fig.canvas.draw()
    return fig.canvas.get_renderer()


def data_points_display(fig):
    """Every plotted point (lines and scatter offsets) of every axes, in display pixels."""
    pts = []
    for ax in fig.axes:
        for line in ax.get_lines():
            xy = np.asarray(line.get_xydata(), dtype=float)
            if xy.size:
                pts.append(line.get_transform().transform(xy))
        for coll in ax.collections:
            off = np.asarray(coll.get_offsets(), dtype=float)
            if off.size and off.ndim == 2:
                pts.append(coll.get_offset_transform().transform(off))
    pts = np.concatenate(pts) if pts else np.empty((0, 2))
    return pts[np.all(np.isfinite(pts), axis=1)]


def assert_legends_cover_no_data(fig):
    renderer = drawn(fig)
    legends = list(fig.legends) + [ax.get_legend() for ax in fig.axes if ax.get_legend()]
    assert legends, "the figure has a legend to check"
    pts = data_points_display(fig)
    assert len(pts) > 0
    for legend in legends:
        box = legend.get_window_extent(renderer)
        inside = (pts[:, 0] >= box.x0) & (pts[:, 0] <= box.x1) & \
                 (pts[:, 1] >= box.y0) & (pts[:, 1] <= box.y1)
        assert not inside.any(), f"{inside.sum()} data points under the legend"
        for ax in fig.axes:  # and outside every panel, so nothing drawn later can hide
            assert not box.overlaps(ax.get_window_extent(renderer)), ax.get_label()


def labels(ax, which):
    """The non-empty tick labels (major and minor) of ticks inside the axis limits."""
    axis = ax.xaxis if which == "x" else ax.yaxis
    lo, hi = sorted(axis.get_view_interval())
    out = []
    for locs, formatter in ((axis.get_majorticklocs(), axis.get_major_formatter()),
                            (axis.get_minorticklocs(), axis.get_minor_formatter())):
        locs = [x for x in locs if lo * (1 - 1e-9) <= x <= hi * (1 + 1e-9)]
        out += [text for text in formatter.format_ticks(locs) if text.strip()]
    return out


def all_text(fig):
    texts = [t.get_text() for t in fig.findobj(matplotlib.text.Text)]
    return "\n".join(texts)


# -- 1, 2: one normalisation per kind, said on the axis; the settings on the plot ------------

def test_line_axes_say_their_normalisation(demo_result):
    plt = pyplot()
    em = line_figure(emission_profile(demo_result))
    pc = line_figure(pcygni_profile(demo_result))
    # docs/lines.md, "Normalisation": emission continuum 0 and peak 1, P Cygni F / F_c
    em_label, pc_label = em.axes[0].get_ylabel(), pc.axes[0].get_ylabel()
    assert "F / F$_{\\rm peak}$" in em_label and "continuum 0" in em_label
    assert "F / F$_{\\rm c}$" in pc_label and "continuum = 1" in pc_label
    assert "emission" in em.axes[0].get_title() and "P Cygni" in pc.axes[0].get_title()
    plt.close("all")


def test_line_settings_appear_on_the_plot(demo_result):
    settings = LineSettings(turbulence="17 km/s", resolution=20000.0, hwzi_fraction=0.07,
                            occultation=False, emissivity_power=1)
    fig = line_figure(emission_profile(demo_result, settings), settings)
    text = all_text(fig)
    c_kms = scipy.constants.c / 1e3  # CODATA, scipy.constants
    total = np.hypot(17.0, c_kms / 20000.0)  # Gaussians add in quadrature (common practice)
    for expected in ("occultation off", "turbulence 17 km/s FWHM", "R = 20000",
                     f"Gaussian FWHM {total:.4g} km/s", "HWZI level 0.07", "ρ$^1$"):
        assert expected in text, expected
    p_settings = LineSettings(line_strength=30.0, edge_depth=0.2)
    fig = line_figure(pcygni_profile(demo_result, p_settings), p_settings)
    text = all_text(fig)
    assert "$k_0$ = 30" in text and "edge depth 0.2" in text and "occultation on" in text
    assert_legends_cover_no_data(fig)  # the settings box sits beside the axes too
    box = [t for t in fig.axes[0].texts if "line settings" in t.get_text()][0]
    renderer = fig.canvas.get_renderer()
    assert not box.get_window_extent(renderer).overlaps(fig.axes[0].get_window_extent(renderer))
    pyplot().close("all")


# -- 3: the HWZI marks where the occulted line really ends ---------------------------------

def ends_by_interp(w, f, level):
    """Outermost crossings of f = level, by linear interpolation written out here."""
    above = np.flatnonzero(f >= level)
    i, j = above[0], above[-1]
    blue = np.interp(level, [f[i - 1], f[i]], [w[i - 1], w[i]])
    red = np.interp(level, [f[j + 1], f[j]], [w[j + 1], w[j]])
    return blue, red


@pytest.mark.parametrize("turbulence", ["20 km/s", "0 km/s"])
def test_hwzi_marks_sit_at_the_measured_ends_of_an_occulted_line(demo_result, turbulence):
    # A core radius of 120 Rsun hides a larger part of the receding gas: the red wing ends
    # several grid steps short of the blue one.
    settings = LineSettings(turbulence=turbulence)
    line = emission_profile(demo_result, settings, core_radius="120 Rsun")
    fig = line_figure(line, settings)
    ax = fig.axes[0]
    marks = [ln for ln in ax.get_lines() if ln.get_marker() == "D"]
    assert len(marks) == 1
    x, y = marks[0].get_xdata(), marks[0].get_ydata()
    w, f = line.velocity.value, line.flux
    dw = w[1] - w[0]
    blue, red = ends_by_interp(w, f, settings.hwzi_fraction)
    hwzi = line.hwzi.value
    assert np.allclose(y, settings.hwzi_fraction)
    assert red < -blue - 3 * dw  # asymmetric: the marks must not be +-HWZI
    assert x[1] == pytest.approx(red, abs=1e-9 * hwzi)  # the red end where the line ends
    # the blue end gives the HWZI (docs/lines.md: max(-w_-, w_+)); it is the measured value
    assert x[0] == pytest.approx(-hwzi, rel=1e-12)
    if turbulence != "0 km/s":  # on the grid profile the measurement is this crossing
        assert x[0] == pytest.approx(blue, abs=1e-9 * hwzi)
    else:  # on the exact profile: within a grid step of the grid crossing
        assert abs(x[0] - blue) < dw
    assert f"HWZI {hwzi:.0f} km/s" in all_text(fig)
    pyplot().close("all")


# -- 4: legends cover no data ------------------------------------------------------------

def test_legends_cover_no_data(demo_result, sweeps):
    plt = pyplot()
    assert_legends_cover_no_data(plot_profile(demo_result))
    assert_legends_cover_no_data(line_figure(emission_profile(demo_result)))
    fig = sweep_figure(sweeps["one"])
    assert "no solution" in all_text(fig)  # the failed row's legend entry is there
    assert_legends_cover_no_data(fig)
    assert_legends_cover_no_data(line_figure(pcygni_profile(demo_result)))
    plt.close("all")


# -- 5, 8: short log axes labelled, no offset text -----------------------------------------

@pytest.mark.parametrize("lo, hi", [(3.5e6, 4.5e6), (1.0, 8.0), (2.0, 30.0), (0.9, 1.1),
                                    (1e-16, 1e-9), (40.0, 3e3)])
def test_every_log_axis_gets_three_labelled_ticks(lo, hi):
    plt = pyplot()
    fig, ax = plt.subplots()
    ax.plot([lo, hi], [lo, hi])
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlim(lo, hi)
    ax.set_ylim(lo, hi)
    label_log_ticks(ax, "x")
    label_log_ticks(ax, "y")
    drawn(fig)
    for which in "xy":
        assert len(labels(ax, which)) >= MIN_TICK_LABELS, (lo, hi, labels(ax, which))
    assert not any("e+" in t or "e-" in t for t in labels(ax, "x"))
    plt.close(fig)


def test_sweep_plots_label_short_log_axes_and_show_no_offset(sweeps):
    fig = sweep_figure(sweeps["one"])
    drawn(fig)
    mdot_ax = fig.axes[0]
    assert mdot_ax.get_yscale() == "log"
    lo, hi = mdot_ax.get_ylim()
    assert np.log10(hi / lo) < 1.0  # the converged rows' Mdot spans less than a decade
    assert len(labels(mdot_ax, "y")) >= MIN_TICK_LABELS
    fig2 = sweep_figure(sweeps["two"])
    drawn(fig2)
    for f in (fig, fig2):
        for ax in f.axes:  # colour bars included
            for axis in (ax.xaxis, ax.yaxis):
                assert axis.get_offset_text().get_text() == "", ax.get_xlabel()
    ax = fig2.axes[0]
    # the luminosity axis (3.5e6 to 4.5e6 Lsun) shows 3.6 ... with the scale in its label
    assert ax.get_xlabel() == "star.luminosity [10$^{6}$ Lsun]"
    assert all(0.1 < float(t) < 10 for t in labels(ax, "x"))
    pyplot().close("all")


# -- 6: facets for a third axis, or say what is left out --------------------------------------

def test_three_axis_sweep_draws_one_row_of_panels_per_third_axis_value(sweeps, monkeypatch):
    import windsolve.plotting as plotting
    table, _ = read_sweep_table(sweeps["three"])
    fig = sweep_figure(sweeps["three"])
    panels = [ax for ax in fig.axes if ax.get_label() != "<colorbar>"]
    assert len(panels) == 2 * 2  # (Mdot, v_inf) x two porosity lengths
    n_points = sum(len(c.get_offsets()) for ax in panels[::2] for c in ax.collections)
    assert n_points == len(table["converged"]) == 16  # every row drawn once
    titles = {ax.get_title() for ax in panels}
    assert titles == {"porosity.length = 5 Rsun", "porosity.length = 20 Rsun"}
    assert "every row of the sweep drawn" in fig._suptitle.get_text()
    # 16 distinct porosity lengths, more than MAX_FACETS: four ranges of equal counts
    fig = sweep_figure(sweeps["random"])
    panels = [ax for ax in fig.axes if ax.get_label() != "<colorbar>"]
    assert len(panels) == 2 * 4
    assert [len(ax.collections[0].get_offsets()) for ax in panels[::2]] == [4, 4, 4, 4]
    assert all("porosity.length" in ax.get_title() and " to " in ax.get_title()
               and "(4 rows)" in ax.get_title() for ax in panels)
    assert "every row of the sweep drawn" in fig._suptitle.get_text()
    monkeypatch.setattr(plotting, "MAX_FACETS", 1)
    fig = sweep_figure(sweeps["three"])
    assert len([ax for ax in fig.axes if ax.get_label() != "<colorbar>"]) == 2
    assert ("showing 1 of 2 values of porosity.length (one row each); 1 values (8 rows) "
            "not drawn") in fig._suptitle.get_text()
    pyplot().close("all")


# -- 7: a failed or inconsistent profile is not drawn as a solution --------------------------

def test_an_inconsistent_line_is_refused_and_nothing_written(demo_result, tmp_path):
    line = emission_profile(demo_result)
    bad = [dataclasses.replace(line, flux=np.where(np.arange(line.flux.size) == 7, np.nan,
                                                   line.flux)),
           dataclasses.replace(line, flux=2.0 * line.flux),  # not normalised to peak 1
           dataclasses.replace(pcygni_profile(demo_result),
                               flux=pcygni_profile(demo_result).flux - 0.5),  # continuum 0.5
           dataclasses.replace(line, kind="absorption")]
    for profile in bad:
        with pytest.raises(ModelError) as info:
            plot_line(profile, tmp_path / "bad.png")
        assert "\n" not in str(info.value) and "not a solution" in str(info.value)
    assert list(tmp_path.iterdir()) == []


def test_a_result_that_did_not_converge_is_marked_not_a_solution(demo_result):
    failed = dataclasses.replace(demo_result, converged=False, status="max_shots",
                                 message="the shooting did not converge (test copy)")
    fig = plot_profile(failed)
    assert fig._suptitle.get_text().startswith("NOT A SOLUTION")
    assert "max_shots" in fig._suptitle.get_text()
    shown = [ax for ax in fig.axes if ax.get_visible()]
    assert all(any("NOT A SOLUTION" in t.get_text() for t in ax.texts) for ax in shown)
    assert all(ln.get_color() == "0.55" for ax in fig.axes for ln in ax.get_lines()[:1])
    pyplot().close("all")


# -- 9: Delta chi^2 contours and the number of free parameters ------------------------------

def sigma_level(k, s):
    """Delta chi^2 of the s-sigma region for k parameters (scipy.stats)."""
    p = scipy.stats.norm.cdf(s) - scipy.stats.norm.cdf(-s)
    return scipy.stats.chi2.ppf(p, k)


def observed(tmp_path, table, row):
    v = float(table["terminal_velocity"][row]) / 1e5 * 1.003  # near one row, not on it
    p = tmp_path / "obs.csv"
    p.write_text(f"object,quantity,line,value,uncertainty,unit\nA,terminal_velocity,-,{v!r},"
                 f"1.5,km/s\n")
    return read_observed(p)


def test_chi2_map_draws_the_delta_chi2_contours_of_two_parameters(sweeps, tmp_path):
    from matplotlib.contour import ContourSet
    table, _ = read_sweep_table(sweeps["two"])
    views = axis_views(sweeps["two"])
    c = compare_table(table, observed(tmp_path, table, 2))
    regions = chi2_map(c, *(table[v.key] * v.factor for v in views))
    fig = chi2_figure(table, views, c.chi2, regions)
    ax = fig.axes[0]
    contours = [a for a in ax.get_children() if isinstance(a, ContourSet)]
    assert len(contours) == 1
    lo = np.nanmin(c.chi2)
    expected = [lo + sigma_level(2, s) for s in (1, 2, 3)]  # 2.30, 6.18, 11.83
    assert np.allclose(contours[0].levels, expected, rtol=1e-9)
    title = ax.get_title()
    assert "2 free parameters (star.luminosity, gas.sound_speed)" in title
    assert "2 parameters of interest" in title and "2.3, 6.18, 11.8" in title
    assert_legends_cover_no_data(fig)
    # a random design of three axes: the profile over porosity.length, triangulated contours
    table, _ = read_sweep_table(sweeps["random"])
    views = axis_views(sweeps["random"])
    c = compare_table(table, observed(tmp_path, table, 2))
    regions = chi2_map(c, *(table[v.key] * v.factor for v in views[:2]))
    fig = chi2_figure(table, views, c.chi2, regions)
    ax = fig.axes[0]
    contours = [a for a in ax.get_children() if isinstance(a, ContourSet)]
    assert len(contours) == 1
    lo = np.nanmin(c.chi2)
    assert np.allclose(contours[0].levels, [lo + sigma_level(2, s) for s in (1, 2, 3)],
                       rtol=1e-9)
    assert "3 free parameters" in ax.get_title()
    assert "minimised over porosity.length" in ax.get_title()
    pyplot().close("all")


def test_chi2_of_one_axis_draws_the_one_parameter_levels(sweeps, tmp_path):
    table, _ = read_sweep_table(sweeps["one"])
    views = axis_views(sweeps["one"])
    c = compare_table(table, observed(tmp_path, table, 2))
    chi2 = np.where(c.compared, c.chi2, np.nan)
    lo = np.nanmin(chi2)
    levels = {s: lo + sigma_level(1, s) for s in (1, 2, 3)}  # 1, 4, 9
    fig = chi2_figure(table, views, chi2, {"n_params": 1, "levels": levels})
    ax = fig.axes[0]
    flat = sorted(ln.get_ydata()[0] for ln in ax.get_lines()
                  if len(set(ln.get_ydata())) == 1 and len(ln.get_ydata()) == 2
                  and ln.get_transform() != ax.transData)
    assert np.allclose(flat, sorted(levels.values()), rtol=1e-12)
    assert "1 free parameter (star.luminosity)" in ax.get_title()
    assert "1 parameter of interest" in ax.get_title()
    pyplot().close("all")


def test_compare_plot_writes_the_map(sweeps, tmp_path, capsys):
    obs = tmp_path / "obs.csv"
    obs.write_text("object,quantity,line,value,uncertainty,unit\n"
                   "A,terminal_velocity,-,430,3,km/s\n")
    for name in ("one", "two", "three"):
        png = tmp_path / f"{name}.png"
        assert cli.main(["compare", str(sweeps[name]), str(obs), "--plot", str(png)]) == 0
        assert png.read_bytes()[:4] == b"\x89PNG"
    assert cli.main(["lines", str(sweeps["two"]), "--row", "1", "-o",
                     str(tmp_path / "line.png")]) == 0
    assert (tmp_path / "line.png").read_bytes()[:4] == b"\x89PNG"
