"""The Python API: QTables with units, astropy's reader, run_sweep from a plain script,
dotted replace, short and HTML reprs, critical points with units.

Tiers: (b) unit conversions against astropy's own constants (IAU 2015 nominal
solar luminosity and radius, astropy.constants); (d) invariants -- a QTable
column converted back to cgs is the file's stored column, the profile CSV read
back is the result's profile; (e) a bad key in ``replace`` is one clear error.
"""

import subprocess
import sys
from pathlib import Path

import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable, Table

import windsolve
from windsolve.errors import ModelError
from windsolve.sweep import load_sweep, read_sweep_table, run_sweep

DEMO = Path(str(windsolve.demo_model_path()))
SWEEP = f"""[sweep]
base = "{DEMO}"
design = "grid"
[[axis]]
key = "star.luminosity"
values = ["3e6 Lsun", "4.5e6 Lsun"]
[[axis]]
key = "porosity.length"
values = ["3 Rsun", "30 Rsun"]
"""


@pytest.fixture(scope="module")
def sweep_h5(tmp_path_factory):
    d = tmp_path_factory.mktemp("sweep")
    (d / "sweep.toml").write_text(SWEEP)
    run = run_sweep(load_sweep(d / "sweep.toml"), d / "sweep.h5", workers=1, quiet=True)
    assert run.converged == 4
    return d / "sweep.h5"


def test_sweep_qtable_axes_in_the_sweep_files_units(sweep_h5):
    import windsolve.tabular  # noqa: F401 -- registers format="windsolve"
    table = read_sweep_table(sweep_h5, as_qtable=True)
    raw, _ = read_sweep_table(sweep_h5)
    assert isinstance(table, QTable)
    assert table["star.luminosity"].unit == u.Lsun  # as the sweep file wrote it
    # 3e6 Lsun against astropy's L_sun (IAU 2015 nominal, astropy.constants)
    assert np.allclose(table["star.luminosity"].to_value(u.erg / u.s)[:2],
                       3e6 * const.L_sun.cgs.value, rtol=1e-14, atol=0)
    assert np.allclose(table["star.luminosity"].value[:2], 3e6, rtol=1e-14, atol=0)
    assert table["porosity.length"].unit == u.Rsun
    assert np.allclose(table["porosity.length"].value[[0, 1]], [3, 30], rtol=1e-14)
    # the summary: every column converts back to the file's cgs numbers
    for key, unit in (("mass_loss_rate", u.g / u.s), ("terminal_velocity", u.cm / u.s),
                      ("sonic_radius", u.cm)):
        assert np.allclose(table[key].to_value(unit), raw[key], rtol=1e-13, atol=0)
    assert table["mass_loss_rate"].unit == u.Msun / u.yr
    assert table["terminal_velocity"].unit == u.km / u.s
    # an isothermal sweep carries no Model B column
    assert "photosphere_radius" not in table.colnames
    cgs = read_sweep_table(sweep_h5, as_qtable=True, cgs=True)
    assert cgs["star.luminosity"].unit == u.erg / u.s


def test_read_table_to_pandas(sweep_h5):
    pytest.importorskip("pandas")  # optional: pandas is no dependency of windsolve
    frame = windsolve.read_table(sweep_h5).to_pandas()  # astropy's own conversion
    assert len(frame) == 4 and "mass_loss_rate" in frame.columns


def test_astropy_table_read_on_a_sweep_file(sweep_h5):
    import windsolve.tabular  # noqa: F401
    q = QTable.read(sweep_h5, format="windsolve")
    t = Table.read(sweep_h5, format="windsolve")
    assert len(q) == len(t) == 4
    assert q["star.luminosity"].unit == u.Lsun and t["star.luminosity"].unit == u.Lsun


def test_family_style_table_helpers_on_a_result(demo_result, demo_h5):
    table = windsolve.read_table(demo_h5)
    assert table.meta["file_kind"] == "result"
    # the demo's star.radius is written in Rsun: the radius column follows it
    assert table["radius"].unit == u.Rsun
    assert np.allclose(table["radius"].to_value(u.cm), demo_result.profile["radius"].value,
                       rtol=1e-14, atol=0)
    assert table["radius"][0].to_value(u.cm) == pytest.approx(100 * const.R_sun.cgs.value,
                                                              rel=1e-14)


@pytest.mark.parametrize("workers", [1, 2])
def test_run_sweep_from_a_plain_script_without_a_main_guard(tmp_path, workers):
    (tmp_path / "sweep.toml").write_text(SWEEP)
    script = tmp_path / "plain.py"
    script.write_text(
        "from windsolve.sweep import load_sweep, run_sweep\n"
        "print('top level ran')\n"
        f"run = run_sweep(load_sweep('sweep.toml'), 'out.h5', workers={workers}, quiet=True)\n"
        "print('done', run.done, run.converged)\n")
    proc = subprocess.run([sys.executable, str(script)], cwd=tmp_path, capture_output=True,
                          text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert proc.stdout.count("top level ran") == 1  # not re-run in a worker
    assert "done 4 4" in proc.stdout
    assert (tmp_path / "out.h5").exists()
    assert not (tmp_path / "out.h5.partial").exists()
    # and again: nothing left blocks the next call
    (tmp_path / "out.h5").unlink()
    proc = subprocess.run([sys.executable, str(script)], cwd=tmp_path, capture_output=True,
                          text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr[-2000:]


def test_a_journal_with_no_finished_row_does_not_block(tmp_path, sweep_h5):
    (tmp_path / "sweep.toml").write_text(SWEEP)
    out = tmp_path / "out.h5"
    # what a run that died before any model finished leaves: the header line only
    (tmp_path / "out.h5.partial").write_text('{"sweep": "x", "rows": 4}\n')
    run = run_sweep(load_sweep(tmp_path / "sweep.toml"), out, workers=1, quiet=True)
    assert run.done == 4 and out.exists() and not (tmp_path / "out.h5.partial").exists()


def test_replace_takes_dotted_model_file_keys(demo_model):
    brighter = demo_model.replace(**{"star.luminosity": "3e6 Lsun"})
    assert brighter.luminosity == 3e6 * u.Lsun
    assert brighter.mass == demo_model.mass  # the rest unchanged
    same = demo_model.replace(luminosity="3e6 Lsun")  # field names still work
    assert same.luminosity == brighter.luminosity
    changed = demo_model.replace(**{"porosity.length": "20 Rsun", "gas.sound_speed": "25 km/s"})
    assert changed.porosity_length == 20 * u.Rsun and changed.sound_speed == 25 * u.km / u.s
    with pytest.raises(ModelError, match="star.luminosity"):
        demo_model.replace(**{"star.luminosty": "3e6 Lsun"})


def test_reprs_are_short_and_html_shows_units(demo_model, demo_result, sweep_h5):
    from windsolve.family import FamilyResult
    for obj in (demo_model, demo_result, load_sweep(sweep_h5.parent / "sweep.toml")):
        assert len(repr(obj)) < 300, repr(obj)
        assert "<table>" in obj._repr_html_()
    html = demo_result._repr_html_()
    assert "solMass / yr" in html and "km / s" in html
    assert "solRad" in demo_model._repr_html_()
    # a family of many members with long profiles still prints in one line
    family = FamilyResult(demo_model, "photosphere_temperature", np.linspace(2e4, 3e4, 50),
                          [demo_result] * 50)
    assert len(repr(family)) < 300 and "50 members" in repr(family)
    assert "solMass / yr" in family._repr_html_()
    assert len(str(family).splitlines()) == 51  # one line a member, no arrays


def test_critical_points_carry_units(demo_result, demo_h5):
    (cp,) = [c for c in demo_result.critical_points if "saddle" in c["kind"]]
    assert cp["radius"].unit == u.cm and cp["slope_plus"].unit == 1 / u.s
    rc = demo_result.summary["sonic_radius"]
    assert cp["radius"].to_value(u.cm) == pytest.approx(rc.to_value(u.cm), rel=1e-12)
    again = windsolve.read_result(demo_h5)
    assert again.critical_points[0]["radius"].unit == u.cm
    assert again.critical_points[0]["radius"].value == pytest.approx(cp["radius"].value,
                                                                      rel=1e-15)


def test_the_readme_from_python_example_runs(tmp_path, monkeypatch):
    text = (Path(__file__).resolve().parent.parent / "README.md").read_text()
    section = text.split("## From Python", 1)[1]
    code = section.split("```python", 1)[1].split("```", 1)[0]
    monkeypatch.chdir(tmp_path)
    scope = {}
    exec(compile(code, "README.md (From Python)", "exec"), scope)  # noqa: S102
    # configs/demo.toml at 3e6 Lsun: the README says "about 8.3e-05"; a
    # regression pin of this code (internal), rounded as the README prints it
    mdot = scope["result"].summary["mass_loss_rate"].to_value(u.Msun / u.yr)
    assert round(mdot, 6) == pytest.approx(8.3e-5, abs=1e-6)
    assert scope["profile"]["radius"].unit == u.Rsun


def test_a_model_registered_in_a_guardless_script_gets_the_guard_error(tmp_path):
    # A model class defined in the script itself needs the script in every worker, so
    # there (only) the call must sit under the guard; the error says so, and what the
    # failed run leaves does not block the next call (workers=1, in this process).
    registry_test = Path(__file__).resolve().parent / "test_registry.py"
    script = tmp_path / "plugin.py"
    script.write_text(
        "import sys\n"
        f"exec(open({str(registry_test)!r}).read())  # defines and registers ParkerWind here\n"
        "import windsolve\n"
        "from windsolve.modelfile import dumps\n"
        "from windsolve.sweep import load_sweep, run_sweep\n"
        f"a = windsolve.load_model({str(registry_test.parent.parent / 'configs')!r}\n"
        "                          + '/parker_reference.toml')\n"
        "p = ParkerWind(name='Parker form (invented)', mass=a.mass, radius=a.radius,\n"
        "               eddington_factor=0.1, sound_speed=a.sound_speed,\n"
        "               base_density=a.base_density, outer_radius=a.outer_radius)\n"
        "open('parker.toml', 'w').write(dumps(p.to_dict()))\n"
        "open('sweep.toml', 'w').write('[sweep]\\nbase = \"parker.toml\"\\ndesign = \"grid\"\\n'\n"
        "    '[[axis]]\\nkey = \"boundary.base_density\"\\nvalues = [\"1e-12 g/cm3\", '\n"
        "    '\"2e-12 g/cm3\"]\\n')\n"
        "n = int(sys.argv[1])\n"
        "run = run_sweep(load_sweep('sweep.toml'), 'out.h5', workers=n, quiet=True)\n"
        "print('done', run.converged)\n")
    proc = subprocess.run([sys.executable, str(script), "2"], cwd=tmp_path,
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode != 0
    assert 'if __name__ == "__main__":' in proc.stderr.strip().splitlines()[-1]
    assert not (tmp_path / "out.h5").exists()
    proc = subprocess.run([sys.executable, str(script), "1"], cwd=tmp_path,
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert "done 2" in proc.stdout and not (tmp_path / "out.h5.partial").exists()
