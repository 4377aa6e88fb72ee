"""windsolve compare / match / extract / lines on sweep and family files, through the CLI.

Bad input (issue 12): one line on stderr, exit 2, nothing written.  The
row-to-model-file round trip is checked against the sweep's own table
(read here with h5py, not with windsolve's reader).
"""

import shutil

import h5py
import numpy as np
import pytest

from windsolve import cli, demo_model_path
from windsolve.sweep import load_sweep, run_sweep

DEMO = demo_model_path()
MSUN_YR = 1.98840987e33 / 3.15576e7  # g/s in one Msun/yr (IAU 2015 nominal mass, Julian yr)


def sweep(tmp_path, observables=True, name="sweep"):
    path = tmp_path / f"{name}.toml"
    path.write_text(f'[sweep]\nbase = "{DEMO}"\ndesign = "grid"\n'
                    + ('[observables]\nturbulence = "10 km/s"\n' if observables else "")
                    + '[[axis]]\nkey = "star.luminosity"\nstart = "3.5e6 Lsun"\n'
                      'stop = "4.5e6 Lsun"\nnum = 5\n'
                      '[[axis]]\nkey = "gas.sound_speed"\nvalues = ["19 km/s", "21 km/s"]\n')
    out = tmp_path / f"{name}.h5"
    run_sweep(load_sweep(path), out, workers=1, quiet=True)
    return out


@pytest.fixture(scope="module")
def sweep_h5(tmp_path_factory):
    return sweep(tmp_path_factory.mktemp("cmp"))


def csv_file(tmp_path, rows, name="obs.csv"):
    p = tmp_path / name
    p.write_text("object,quantity,line,value,uncertainty,unit\n" + rows)
    return p


def one_line_exit_2(argv, capsys, tmp_path, *expected):
    before = sorted(p.name for p in tmp_path.iterdir())
    assert cli.main(argv) == 2
    out, err = capsys.readouterr()
    assert err.strip() and "\n" not in err.strip(), err
    for text in expected:
        assert text in err, err
    assert sorted(p.name for p in tmp_path.iterdir()) == before  # nothing written
    return err


def test_sweep_compare_prints_settings_counts_and_ranges(sweep_h5, tmp_path, capsys):
    obs = csv_file(tmp_path, "A,terminal_velocity,-,440,40,km/s\nA,fwhm,Ha,480,50,km/s\n"
                             "B,terminal_velocity,-,400,30,km/s\n")
    assert cli.main(["compare", str(sweep_h5), str(obs)]) == 0
    out = capsys.readouterr().out
    assert "line settings (stored in the sweep file)" in out and "turbulence 10 km/s" in out
    assert out.count("chi2_min") == 2  # one answer per object
    assert "A: 10 rows: 10 converged, 0 not converged; 10 compared on 2 of 2" in out
    assert "2 free parameters" in out and "star.luminosity: 1σ" in out
    assert "Delta chi2 = 2.30, 6.18, 11.8" in out


def test_chi2_csv_carries_mdot_vinf_predictions_and_residuals(sweep_h5, tmp_path, capsys):
    import csv
    obs = csv_file(tmp_path, "A,terminal_velocity,-,440,40,km/s\nA,fwhm,Ha,480,50,km/s\n")
    out = tmp_path / "chi2.csv"
    assert cli.main(["compare", str(sweep_h5), str(obs), "-o", str(out)]) == 0
    rows = list(csv.reader(out.open()))
    header, rows = rows[0], rows[1:]
    assert header[:5] == ["row", "star.luminosity [Lsun]", "gas.sound_speed [km/s]",
                          "mass_loss_rate [Msun/yr]", "terminal_velocity [km/s]"]
    with h5py.File(sweep_h5) as f:
        mdot = f["table/mass_loss_rate"][()]
        vinf = f["table/terminal_velocity"][()]
        fwhm = f["table/fwhm"][()]
        L = f["table/star.luminosity"][()]
    for i, r in enumerate(rows):
        rec = dict(zip(header, r, strict=True))
        assert abs(float(rec["star.luminosity [Lsun]"]) - L[i] / 3.828e33) < 1e-9 * L[i] / 3.828e33
        assert abs(float(rec["mass_loss_rate [Msun/yr]"]) / (mdot[i] / MSUN_YR) - 1) < 1e-6
        assert float(rec["terminal_velocity [km/s]"]) == pytest.approx(vinf[i] / 1e5, rel=1e-14)
        z_w = (fwhm[i] / 1e5 - 480) / 50
        assert float(rec["residual fwhm_Ha_3 [sigma]"]) == pytest.approx(z_w, rel=1e-12)
        z_v = (vinf[i] / 1e5 - 440) / 40
        assert float(rec["chi2"]) == pytest.approx(z_v ** 2 + z_w ** 2, rel=1e-12)


def test_nan_edge_velocity_excludes_the_measurement(sweep_h5, tmp_path, capsys):
    broken = tmp_path / "nan_edge.h5"
    shutil.copy(sweep_h5, broken)
    with h5py.File(broken, "r+") as f:
        f["table/edge_velocity"][...] = np.nan  # as a decelerating flow gives
    obs = csv_file(tmp_path, "A,terminal_velocity,-,440,40,km/s\n"
                             "A,edge_velocity,CIV,-650,50,km/s\n")
    assert cli.main(["compare", str(broken), str(obs)]) == 0
    out = capsys.readouterr().out
    assert "10 compared on 1 of 2 measurements" in out
    assert "edge_velocity (CIV) (file line 3): excluded" in out and "blue edge" in out
    assert "failed" not in out


def test_positive_edge_velocity_is_refused(sweep_h5, tmp_path, capsys):
    obs = csv_file(tmp_path, "A,edge_velocity,CIV,650,50,km/s\n")
    one_line_exit_2(["compare", str(sweep_h5), str(obs), "-o", str(tmp_path / "c.csv")],
                    capsys, tmp_path, "negative", "-650")


def test_unknown_object_is_refused(sweep_h5, tmp_path, capsys):
    obs = csv_file(tmp_path, "A,terminal_velocity,-,440,40,km/s\n")
    one_line_exit_2(["compare", str(sweep_h5), str(obs), "--object", "Z",
                     "-o", str(tmp_path / "c.csv")], capsys, tmp_path, "\"Z\"")


def test_line_options_that_differ_from_the_stored_ones_are_refused(sweep_h5, tmp_path, capsys):
    obs = csv_file(tmp_path, "A,fwhm,Ha,480,50,km/s\n")
    one_line_exit_2(["compare", str(sweep_h5), str(obs), "--turbulence", "20 km/s",
                     "-o", str(tmp_path / "c.csv")], capsys, tmp_path,
                    "turbulence = 10 km/s stored, 20 km/s given")
    # the same settings as stored: accepted
    assert cli.main(["compare", str(sweep_h5), str(obs), "--turbulence", "10 km/s"]) == 0


def test_a_quantity_the_sweep_cannot_predict_is_refused(tmp_path, capsys):
    plain = sweep(tmp_path, observables=False, name="plain")
    obs = csv_file(tmp_path, "A,fwhm,Ha,480,50,km/s\n")
    one_line_exit_2(["compare", str(plain), str(obs), "-o", str(tmp_path / "c.csv")],
                    capsys, tmp_path, "fwhm", "[observables]")
    obs2 = csv_file(tmp_path, "A,terminal_velocity,-,440,40,km/s\n", name="v.csv")
    one_line_exit_2(["compare", str(plain), str(obs2), "--turbulence", "5 km/s"],
                    capsys, tmp_path, "holds no line widths")


def test_anything_but_a_windsolve_file_is_refused_by_name(tmp_path, capsys):
    obs = csv_file(tmp_path, "A,terminal_velocity,-,440,40,km/s\n")
    one_line_exit_2(["compare", str(obs), str(obs)], capsys, tmp_path, "obs.csv")
    one_line_exit_2(["lines", str(obs)], capsys, tmp_path, "obs.csv")


def test_extract_round_trip_reproduces_the_row(sweep_h5, tmp_path, capsys):
    from windsolve.result import read_result
    model = tmp_path / "row7.toml"
    assert cli.main(["extract", str(sweep_h5), "--row", "7", "-o", str(model)]) == 0
    out = tmp_path / "row7.h5"
    assert cli.main(["run", str(model), "-o", str(out), "-q"]) == 0
    r = read_result(out)
    with h5py.File(sweep_h5) as f:
        for key in ("mass_loss_rate", "terminal_velocity", "sonic_radius"):
            assert r.summary[key].cgs.value == pytest.approx(f["table"][key][7], rel=1e-12)


def test_extract_best_picks_the_lowest_chi2(sweep_h5, tmp_path, capsys):
    obs = csv_file(tmp_path, "A,terminal_velocity,-,440,40,km/s\n")
    with h5py.File(sweep_h5) as f:
        best = int(np.argmin(np.abs(f["table/terminal_velocity"][()] - 440e5)))
    model = tmp_path / "best.toml"
    assert cli.main(["extract", str(sweep_h5), "--best", str(obs), "-o", str(model)]) == 0
    assert f"row {best} " in capsys.readouterr().out


def test_extract_of_a_row_that_does_not_exist(sweep_h5, tmp_path, capsys):
    one_line_exit_2(["extract", str(sweep_h5), "--row", "10", "-o", str(tmp_path / "m.toml")],
                    capsys, tmp_path, "no row 10", "0 to 9")
    one_line_exit_2(["lines", str(sweep_h5), "--row", "-1"], capsys, tmp_path, "no row -1")


def test_lines_reads_a_sweep_row(sweep_h5, capsys):
    assert cli.main(["lines", str(sweep_h5), "--row", "2"]) == 0
    assert "FWHM" in capsys.readouterr().out


def test_match_reports_the_interval_of_plus_minus_sigma(tmp_path, capsys):
    obs = csv_file(tmp_path, "A,terminal_velocity,-,450,40,km/s\n")
    assert cli.main(["match", str(DEMO), "--key", "star.luminosity", "--from", "3e6 Lsun",
                     "--to", "6e6 Lsun", "--observed", str(obs)]) == 0
    out = capsys.readouterr().out
    assert "observed ± 1 sigma maps to star.luminosity" in out
    import re
    lo, hi = (float(x) for x in re.findall(r"= ([0-9.e+]+) solLum to ([0-9.e+]+) solLum",
                                           out.splitlines()[-1])[0])
    value = float(re.search(r"star.luminosity = ([0-9.e+]+)", out).group(1))
    assert lo < value < hi
    # v_inf rises with L here: the ends reproduce 410 and 490 km/s
    import windsolve
    base = windsolve.load_model(DEMO)
    for L, target in ((lo, 410e5), (hi, 490e5)):
        r = windsolve.solve(base.replace(luminosity=f"{L!r} Lsun"))
        assert r.summary["terminal_velocity"].cgs.value == pytest.approx(target, rel=1e-4)


def test_match_says_when_sigma_is_not_reached(tmp_path, capsys):
    obs = csv_file(tmp_path, "A,terminal_velocity,-,450,400,km/s\n")
    assert cli.main(["match", str(DEMO), "--key", "star.luminosity", "--from", "3e6 Lsun",
                     "--to", "6e6 Lsun", "--observed", str(obs)]) == 0
    assert "widen --from/--to" in capsys.readouterr().out


@pytest.fixture(scope="module")
def family_h5(tmp_path_factory):
    from windsolve import load_model
    from windsolve.family import solve_family
    fam = solve_family(load_model("configs/bump_wind.toml"), "photosphere_temperature",
                       4e4, 6e4, 3)
    return fam.to_hdf5(tmp_path_factory.mktemp("fam") / "family.h5")


def test_a_family_is_compared_like_a_sweep(family_h5, tmp_path, capsys):
    from windsolve.family import FamilyResult
    vinf = FamilyResult.from_hdf5(family_h5).column("terminal_velocity")
    target = float(vinf[1]) / 1e5
    obs = csv_file(tmp_path, f"A,terminal_velocity,-,{target!r},{target / 10!r},km/s\n")
    out_csv = tmp_path / "fam.csv"
    assert cli.main(["compare", str(family_h5), str(obs), "-o", str(out_csv)]) == 0
    out = capsys.readouterr().out
    assert "(family)" in out and "at row 1;" in out and "photosphere_temperature: 1σ" in out
    assert out_csv.read_text().splitlines()[0].startswith("row,photosphere_temperature [K]")
    obs_w = csv_file(tmp_path, "A,fwhm,-,500,50,km/s\n", name="w.csv")
    one_line_exit_2(["compare", str(family_h5), str(obs_w)], capsys, tmp_path,
                    "family file stores no line widths")


def test_family_row_round_trip(family_h5, tmp_path, capsys):
    from windsolve.result import read_result
    model = tmp_path / "m.toml"
    assert cli.main(["extract", str(family_h5), "--row", "2", "-o", str(model)]) == 0
    out = tmp_path / "m.h5"
    assert cli.main(["run", str(model), "-o", str(out), "-q"]) == 0
    with h5py.File(family_h5) as f:
        mdot = f["table/mass_loss_rate"][2]
    assert read_result(out).summary["mass_loss_rate"].cgs.value == pytest.approx(mdot,
                                                                                  rel=1e-12)
