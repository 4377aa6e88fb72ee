"""Observed widths: the CSV format, chi^2 over a sweep, matching one parameter.

Tier (d)/(e): an invented data set with a known answer (made from a model
here, never used as a reference for physics): the best sweep row and the
matched parameter must be the ones the synthetic observations came from.
"""

import math
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest

import windsolve
from windsolve import cli
from windsolve.errors import ModelError
from windsolve.observe import match_parameter, read_observed, sweep_chi2
from windsolve.sweep import load_sweep, read_sweep_table, run_sweep

DEMO = Path(str(windsolve.demo_model_path()))
HEADER = "object,quantity,line,value,uncertainty,unit\n"


def csv_file(tmp_path, body, name="obs.csv"):
    path = tmp_path / name
    path.write_text("# invented, for a test\n" + HEADER + body)
    return path


def test_read_observed_converts_units(tmp_path):
    obs = read_observed(csv_file(tmp_path, "Star X,terminal_velocity,-,450,40,km/s\n"
                                           "Star X,fwhm,H-alpha,4.5e7,4e6,cm/s\n"))
    assert [o.quantity for o in obs] == ["terminal_velocity", "fwhm"]
    assert obs[0].value == 450e5 and obs[0].uncertainty == 40e5
    assert obs[1].value == 4.5e7


def test_shipped_example_is_valid():
    obs = read_observed(Path(__file__).parent.parent / "configs" / "observed_widths.csv")
    assert {o.object for o in obs} == {"Calder Var A (invented)"}


@pytest.mark.parametrize("body, fragment", [
    ("Star X,terminal_velocty,-,450,40,km/s\n", 'did you mean "terminal_velocity"'),
    ("Star X,fwhm,-,450,0,km/s\n", "positive"),
    ("Star X,fwhm,-,fast,40,km/s\n", "value \"fast\" is not a number"),
    ("Star X,fwhm,-,450,40,K\n", "not a speed"),
    ("Star X,fwhm,-,450,40\n", "fields"),
    ("Star X,fwhm,-,450,40,km/s\nStar Y,fwhm,-,400,40,km/s\n", "--object"),
])
def test_bad_observed_files(tmp_path, body, fragment):
    with pytest.raises(ModelError) as info:
        read_observed(csv_file(tmp_path, body))
    assert fragment in str(info.value)
    assert "\n" not in str(info.value)


def test_bad_header(tmp_path):
    path = tmp_path / "obs.csv"
    path.write_text("name,value\nX,1\n")
    with pytest.raises(ModelError, match="header"):
        read_observed(path)


def test_chi2_picks_the_row_the_observations_came_from(tmp_path, capsys):
    sweep_path = tmp_path / "sweep.toml"
    sweep_path.write_text(f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n[[axis]]\n'
                          f'key = "star.luminosity"\nstart = "3e6 Lsun"\nstop = "6e6 Lsun"\n'
                          f'num = 7\n')
    out = tmp_path / "sweep.h5"
    run_sweep(load_sweep(sweep_path), out, workers=1, quiet=True)
    table, attrs = read_sweep_table(out)
    truth = 4
    v = float(table["terminal_velocity"][truth])
    obs = csv_file(tmp_path, f"Synthetic,terminal_velocity,-,{v / 1e5!r},{0.01 * v / 1e5!r},"
                             f"km/s\n")
    chi2 = sweep_chi2(table, read_observed(obs))
    assert int(np.nanargmin(chi2)) == truth and chi2[truth] < 1e-12
    csv_out = tmp_path / "chi2.csv"
    png = tmp_path / "chi2.png"
    assert cli.main(["compare", str(out), str(obs), "-o", str(csv_out), "--plot",
                     str(png)]) == 0
    text = capsys.readouterr().out
    assert f"row {truth}: chi2 = 0.000" in text
    # the best rows and the CSV in the unit the sweep file used (Lsun; issue 12)
    lsun = float(table["star.luminosity"][truth] / 3.828e33)  # IAU 2015 nominal L_sun
    assert f"star.luminosity = {lsun:.5g} Lsun" in text
    assert csv_out.read_text().splitlines()[0].startswith("row,star.luminosity [Lsun],")
    assert png.read_bytes()[:4] == b"\x89PNG"


def test_match_recovers_the_parameter_behind_synthetic_data(tmp_path):
    model = windsolve.load_model(DEMO)
    truth = 4.7e6
    made = windsolve.solve(model.replace(luminosity=truth * u.Lsun))
    v = float(made.summary["terminal_velocity"].to_value(u.km / u.s))
    obs = read_observed(csv_file(tmp_path, f"Synthetic,terminal_velocity,-,{v!r},10,km/s\n"))
    value, predicted, scan = match_parameter(model, "star.luminosity", "3e6 Lsun", "6e6 Lsun",
                                             obs[0])
    assert math.isclose(value.to_value(u.Lsun), truth, rel_tol=1e-5)
    assert math.isclose(predicted, v * 1e5, rel_tol=1e-6)


def test_match_says_when_no_value_in_range_can(tmp_path, capsys):
    obs = csv_file(tmp_path, "Synthetic,terminal_velocity,-,5000,10,km/s\n")
    assert cli.main(["match", str(DEMO), "--key", "star.luminosity", "--from", "3e6 Lsun",
                     "--to", "6e6 Lsun", "--observed", str(obs)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no value of star.luminosity" in err[0]
    assert cli.main(["match", str(DEMO), "--key", "star.lumnosity", "--from", "3e6 Lsun",
                     "--to", "6e6 Lsun", "--observed", str(obs)]) == 2
    assert 'did you mean "star.luminosity"' in capsys.readouterr().err


# -- line widths on the command line and inside sweeps ----------------------------

def test_lines_says_when_the_line_is_narrower_than_the_sound_speed(tmp_path, capsys):
    # Porosity length 60 Rsun: the optical core sits in the hydrostatic base,
    # and the unbroadened line is a spike well under a = 20 km/s (its widths
    # are printed to three digits, not as 0.0); with turbulence no note.
    from windsolve.sweep import apply_changes
    result = windsolve.solve(apply_changes(windsolve.load_model(DEMO),
                                           {"porosity.length": "60 Rsun"}))
    path = tmp_path / "spike.h5"
    result.to_hdf5(path)
    assert cli.main(["lines", str(path)]) == 0
    out = capsys.readouterr().out
    assert "narrower than the sound speed (20.0 km/s)" in out
    fwhm = float(out.split("FWHM")[1].split("km/s")[0])
    assert 0.0 < fwhm < 1.0
    assert cli.main(["lines", str(path), "--turbulence", "20 km/s"]) == 0
    assert "narrower" not in capsys.readouterr().out
    # On an even grid no point reaches half the (exact) peak; the plot still marks it.
    from windsolve.lines import LineSettings, emission_profile
    from windsolve.plotting import plot_line
    line = emission_profile(result, LineSettings(n_velocity=400))
    assert line.flux.max() < 0.5
    png = plot_line(line, tmp_path / "spike.png")
    assert Path(png).read_bytes()[:4] == b"\x89PNG"


def test_lines_reads_a_file_windsolve_did_not_write(tmp_path, capsys):
    # Only the docs/physics.md, section 9 layout: /profile datasets with units, /summary attributes.
    import h5py
    r = np.geomspace(7e12, 7e14, 300)
    v = 2e6 + 4e7 * (1 - 7e12 / r)
    rho = 1e21 / (4 * np.pi * r**2 * v)
    path = tmp_path / "foreign.h5"
    with h5py.File(path, "w") as f:
        g = f.create_group("summary")
        g.attrs["converged"] = True
        g.attrs["status"] = "converged"
        g.attrs["terminal_velocity"] = v[-1]
        p = f.create_group("profile")
        for key, data, unit in (("radius", r, "cm"), ("velocity", v, "cm / s"),
                                ("density", rho, "g / cm3")):
            p.create_dataset(key, data=data).attrs["units"] = unit
    out = tmp_path / "line.csv"
    assert cli.main(["lines", str(path), "-o", str(out), "--turbulence", "20 km/s",
                     "--resolution", "5000", "--emissivity-power", "1"]) == 0
    assert "FWHM" in capsys.readouterr().out
    rows = out.read_text().splitlines()
    assert rows[0] == "velocity_km_s,flux" and len(rows) == 402
    assert cli.main(["lines", str(path), "--resolution", "-5"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("windsolve: error:")


def test_widths_measured_inside_a_sweep_match_a_single_model(tmp_path, capsys, demo_result):
    from windsolve.lines import LineSettings, line_widths
    sweep_path = tmp_path / "sweep.toml"
    sweep_path.write_text(f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n'
                          f'[observables]\nturbulence = "10 km/s"\n[[axis]]\n'
                          f'key = "star.luminosity"\nvalues = ["4e6 Lsun", "5e6 Lsun"]\n')
    out = tmp_path / "sweep.h5"
    run_sweep(load_sweep(sweep_path), out, workers=1, quiet=True)
    table, attrs = read_sweep_table(out)
    single = demo_result
    widths = line_widths(single, LineSettings(turbulence="10 km/s"))
    for key in ("fwhm", "hwzi", "edge_velocity"):
        assert math.isclose(table[key][0], widths[key].to_value(u.cm / u.s), rel_tol=1e-6)
    # compare a sweep with widths: no solve needed
    obs = csv_file(tmp_path, f"S,fwhm,-,{float(table['fwhm'][1]) / 1e5!r},5,km/s\n")
    assert cli.main(["compare", str(out), str(obs)]) == 0
    assert "row 1: chi2 = 0.000" in capsys.readouterr().out


def test_compare_without_widths_in_the_sweep_says_what_to_do(tmp_path, capsys):
    sweep_path = tmp_path / "sweep.toml"
    sweep_path.write_text(f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n[[axis]]\n'
                          f'key = "star.luminosity"\nvalues = ["4e6 Lsun"]\n')
    out = tmp_path / "sweep.h5"
    run_sweep(load_sweep(sweep_path), out, workers=1, quiet=True)
    obs = csv_file(tmp_path, "S,fwhm,-,500,5,km/s\n")
    assert cli.main(["compare", str(out), str(obs)]) == 2
    assert "[observables]" in capsys.readouterr().err


@pytest.mark.parametrize("settings", [{}, {"occultation": False}, {"resolution": 3000}])
def test_sweep_rows_give_the_widths_of_line_widths(settings):
    # A worker measures Model A widths from plain arrays, and (with
    # occultation) from the profile beyond r_c alone when the optical core
    # lies there; every row must equal line_widths on the full solve, for
    # cores both beyond and below r_c.
    from windsolve.lines import LineSettings, line_widths
    from windsolve.sweep import apply_changes, run_batch

    base = windsolve.load_model(DEMO)
    lengths = ["1 Rsun", "10 Rsun", "60 Rsun", "100 Rsun"]
    items = [(i, {"porosity.length": h}) for i, h in enumerate(lengths)]
    records = run_batch(base.to_dict(), items, False, settings)
    beyond = 0
    for (_, changes), record in zip(items, records, strict=True):
        result = windsolve.solve(apply_changes(base, changes))
        assert record["converged"] and result.converged
        widths = line_widths(result, LineSettings(**settings))
        for key in ("fwhm", "hwzi", "edge_velocity"):
            expected = widths[key].to_value(u.cm / u.s)
            assert (math.isnan(expected) and math.isnan(record[key])) or \
                math.isclose(record[key], expected, rel_tol=1e-12), (changes, key)
        beyond += lines_core_beyond_sonic_point(result)
    assert 0 < beyond < len(lengths)  # both cases were met


def lines_core_beyond_sonic_point(result):
    # the optical core (tau = 2/3 from outside), the default core of a Model A line
    from windsolve.lines import optical_core_radius_cgs
    p = result.profile
    rc = optical_core_radius_cgs(p["radius"].to_value(u.cm),
                                 p["density"].to_value(u.g / u.cm**3),
                                 p["opacity"].to_value(u.cm**2 / u.g))
    return rc is not None and rc > result.summary["sonic_radius"].to_value(u.cm)
