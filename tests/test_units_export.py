"""CSV exports in the units the user chose, named in the header; inspect in readable units.

Tiers: (b) unit conversions against astropy's constants (IAU 2015 nominal solar
values); (d) a CSV read back equals the file's numbers; (e) an isothermal sweep's
CSV has no column that is empty in every row.
"""

import csv
import io
from pathlib import Path

import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest

import windsolve
from windsolve import cli
from windsolve.sweep import load_sweep, read_sweep_table, run_sweep

DEMO = Path(str(windsolve.demo_model_path()))


@pytest.fixture(scope="module")
def sweep_h5(tmp_path_factory):
    d = tmp_path_factory.mktemp("sweepcsv")
    (d / "sweep.toml").write_text(f"""[sweep]
base = "{DEMO}"
design = "grid"
[[axis]]
key = "star.luminosity"
values = ["3e6 Lsun", "5e6 Lsun"]
""")
    run_sweep(load_sweep(d / "sweep.toml"), d / "sweep.h5", workers=1, quiet=True)
    return d / "sweep.h5"


def _read_csv(path):
    rows = list(csv.reader(io.StringIO(Path(path).read_text())))
    header = rows[0]
    units = {}
    for cell in header:
        name, _, rest = cell.partition(" [")
        units[name] = rest.rstrip("]") if rest else ""
    return units, rows[1:], [h.partition(" [")[0] for h in header]


def test_sweep_csv_in_the_sweep_files_units(sweep_h5, tmp_path, capsys):
    out = tmp_path / "t.csv"
    assert cli.main(["inspect", str(sweep_h5), "--csv", str(out)]) == 0
    units, rows, names = _read_csv(out)
    assert u.Unit(units["star.luminosity"]) == u.Lsun  # the sweep file said Lsun
    lum = np.array([float(r[names.index("star.luminosity")]) for r in rows])
    assert np.allclose(lum, [3e6, 5e6], rtol=1e-14)
    raw, _ = read_sweep_table(sweep_h5)
    mdot = np.array([float(r[names.index("mass_loss_rate")]) for r in rows])
    # g/s -> Msun/yr by astropy's M_sun and the Julian year (astropy.units.yr)
    factor = (u.g / u.s).to(u.Unit(units["mass_loss_rate"]))
    assert np.allclose(mdot, raw["mass_loss_rate"] * factor, rtol=1e-13)
    assert u.Unit(units["mass_loss_rate"]) == u.Msun / u.yr
    # no column empty in every row (no Model B columns in an isothermal sweep)
    for j, name in enumerate(names):
        cells = [r[j] for r in rows]
        assert not all(c in ("", "nan") for c in cells), name
    assert "photosphere_radius" not in names


def test_sweep_csv_cgs_option(sweep_h5, tmp_path, capsys):
    out = tmp_path / "cgs.csv"
    assert cli.main(["inspect", str(sweep_h5), "--csv", str(out), "--cgs"]) == 0
    units, rows, names = _read_csv(out)
    assert u.Unit(units["star.luminosity"]) == u.erg / u.s
    lum = float(rows[0][names.index("star.luminosity")])
    assert lum == pytest.approx(3e6 * const.L_sun.cgs.value, rel=1e-14)  # astropy's L_sun


def test_profile_csv_of_a_result_round_trips(demo_result, demo_h5, tmp_path, capsys):
    out = tmp_path / "profile.csv"
    assert cli.main(["inspect", str(demo_h5), "--csv", str(out)]) == 0
    units, rows, names = _read_csv(out)
    assert u.Unit(units["radius"]) == u.Rsun and u.Unit(units["velocity"]) == u.km / u.s
    for key in ("radius", "velocity", "density"):
        values = np.array([float(r[names.index(key)]) for r in rows]) * u.Unit(units[key])
        assert np.allclose(values.to_value(demo_result.profile[key].unit),
                           demo_result.profile[key].value, rtol=1e-14, atol=0)


def test_inspect_prints_readable_units(demo_h5, capsys):
    assert cli.main(["inspect", str(demo_h5)]) == 0
    out = capsys.readouterr().out
    assert "695700000000000" not in out  # the outer radius, 1e4 Rsun, not in cm
    assert "solRad" in out and "solMass / yr" in out and "km / s" in out
    line = next(x for x in out.splitlines() if x.strip().startswith("outer_radius"))
    assert float(line.split()[1]) == pytest.approx(1e4, rel=1e-12)  # configs/demo.toml
    assert cli.main(["inspect", str(demo_h5), "--cgs"]) == 0
    assert "cm" in capsys.readouterr().out


def test_family_table_and_csv_in_the_model_files_units(tmp_path, capsys):
    from windsolve.family import COLUMNS, solve_family
    model = windsolve.load_model(Path(__file__).resolve().parent.parent / "configs"
                                 / "bump_wind.toml")
    family = solve_family(model, "photosphere_temperature", 4e4, 6e4, 2)
    path = family.to_hdf5(tmp_path / "family.h5")
    table = windsolve.read_table(path)
    # the model file wrote photosphere_luminosity = "2e5 Lsun" (configs/bump_wind.toml)
    assert table["photosphere_luminosity"].unit == model.photosphere_luminosity.unit == u.Lsun
    for key in ("mass_loss_rate", "photosphere_radius", "photosphere_luminosity"):
        assert np.allclose(table[key].to_value(COLUMNS[key]), family.column(key), rtol=1e-13)
    out = tmp_path / "family.csv"
    assert cli.main(["inspect", str(path), "--csv", str(out)]) == 0
    units, rows, names = _read_csv(out)
    assert u.Unit(units["photosphere_radius"]) == u.Rsun
    for j, name in enumerate(names):
        assert not all(r[j] in ("", "nan") for r in rows), name
