"""HDF5 layout (docs/physics.md, section 9), the model file round trip and the CLI happy path."""

import subprocess
import sys
import tomllib

import astropy.units as u
import h5py
import numpy as np
import pytest

import windsolve
from windsolve import cli
from windsolve.modelfile import dumps
from windsolve.result import PROFILE_UNITS, SUMMARY_UNITS

SPEC_PROFILE = ["radius", "velocity", "density", "temperature", "luminosity", "opacity",
                "eddington_factor"]
SPEC_SUMMARY = ["converged", "status", "mass_loss_rate", "terminal_velocity", "sonic_radius",
                "sonic_velocity"]


def test_hdf5_layout(demo_result, tmp_path):
    path = demo_result.to_hdf5(tmp_path / "demo.h5")
    with h5py.File(path, "r") as f:
        for key in ("windsolve_version", "created", "model_toml", "model"):
            assert key in f.attrs
        assert f.attrs["model"] == "isothermal"
        assert f.attrs["windsolve_version"] == windsolve.__version__
        np.datetime64(f.attrs["created"][:19])  # ISO 8601
        for key in SPEC_SUMMARY:
            assert key in f["summary"].attrs
        assert f["summary"].attrs["converged"] is np.True_ or f["summary"].attrs["converged"]
        n = f["profile/radius"].shape[0]
        for key in SPEC_PROFILE:
            d = f["profile"][key]
            assert d.shape == (n,)
            assert u.Unit(d.attrs["units"]) == PROFILE_UNITS[key]
        assert np.all(np.diff(f["profile/radius"][()]) > 0)
        for group in ("profile", "critical_points"):
            for d in f[group].values():
                assert "units" in d.attrs
        # cgs values
        mdot = f["summary"].attrs["mass_loss_rate"]
        assert mdot == demo_result.summary["mass_loss_rate"].to_value(u.g / u.s)
    assert list(tmp_path.iterdir()) == [path]  # no temporary file left


def test_stored_model_round_trips(demo_result, tmp_path):
    path = demo_result.to_hdf5(tmp_path / "demo.h5")
    with h5py.File(path, "r") as f:
        text = f.attrs["model_toml"]
    model = windsolve.model_from_dict(tomllib.loads(text))
    assert model.to_dict() == demo_result.model.to_dict()
    again = windsolve.solve(model)
    assert again.summary["mass_loss_rate"] == demo_result.summary["mass_loss_rate"]
    # the resolved file has the defaults filled in
    assert "outer_radius" in tomllib.loads(text)["numerics"]


def test_read_result_round_trip(demo_result, tmp_path):
    path = demo_result.to_hdf5(tmp_path / "demo.h5")
    back = windsolve.read_result(path)
    assert back.converged and back.status == "converged"
    for key, q in demo_result.profile.items():
        np.testing.assert_array_equal(back.profile[key].to_value(PROFILE_UNITS[key]),
                                      q.to_value(PROFILE_UNITS[key]))
    for key, q in demo_result.summary.items():
        assert back.summary[key].to_value(SUMMARY_UNITS[key]) == q.to_value(SUMMARY_UNITS[key])


def test_interrupted_write_leaves_no_file(demo_result, tmp_path, monkeypatch):
    import windsolve.result as result_module

    def boom(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(result_module, "dumps", boom, raising=False)
    import windsolve.modelfile
    monkeypatch.setattr(windsolve.modelfile, "dumps", boom)
    with pytest.raises(KeyboardInterrupt):
        demo_result.to_hdf5(tmp_path / "x.h5")
    assert list(tmp_path.iterdir()) == []


def test_toml_writer_round_trips_values():
    data = {"model": "isothermal", "name": 'star "A"\\b', "star": {"mass": "1.0 solMass"},
            "numerics": {"rtol": 1e-08, "flag": True, "n": 3}}
    assert tomllib.loads(dumps(data)) == data


def test_cli_run_demo_writes_file(tmp_path, capsys):
    out = tmp_path / "demo.h5"
    assert cli.main(["run", "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert "mass-loss rate" in text and "converged" in text
    assert out.exists()
    assert cli.main(["inspect", str(out), "--model"]) == 0
    text = capsys.readouterr().out
    assert "mass_loss_rate" in text and "[star]" in text and "[g / cm3]" in text
    png = tmp_path / "demo.png"
    assert cli.main(["plot", str(out), "-o", str(png)]) == 0
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_cli_check_prints_derived_numbers(capsys):
    assert cli.main(["check"]) == 0
    text = capsys.readouterr().out
    for fragment in ("mean molecular weight", "Eddington luminosity", "Gamma at the base",
                     "escape speed", "expected sonic radius"):
        assert fragment in text


def test_cli_partial_solution_exit_3(tmp_path, capsys):
    model = tmp_path / "stall.toml"
    model.write_text("""model = "isothermal"
name = "stalling test star (invented)"
[star]
mass = "1 Msun"
radius = "1 Rsun"
luminosity = "3.4e4 Lsun"
[gas]
sound_speed = "80 km/s"
[boundary]
base_density = "0.1 g/cm3"
[energy]
photon_tiring = true
""")
    out = tmp_path / "stall.h5"
    assert cli.main(["run", str(model), "-o", str(out)]) == 3
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "stalls" in err[0]
    with h5py.File(out, "r") as f:
        assert not f["summary"].attrs["converged"]
        assert f["summary"].attrs["status"] == "stalled"


@pytest.mark.slow
def test_console_script_runs_demo(tmp_path):
    # the README's first command, end to end in a fresh process
    proc = subprocess.run([sys.executable, "-m", "windsolve", "run", "-o",
                           str(tmp_path / "d.h5")], capture_output=True, text=True,
                          cwd=tmp_path, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert "Calder Var A" in proc.stdout
