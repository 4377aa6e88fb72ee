"""The base anchor (R0, L0 with T0 or rho0): a quasi-Newton solve in a few dozen shots.

References outside the new code: the photosphere-anchored solve the base
values were taken from (the two anchors describe one solution), and the
numbers today's nested root-finds gave on the same model (main at 9c66170,
typed in below).
"""

import astropy.units as u
import numpy as np
import pytest

import windsolve
from windsolve.models import DiffusionWind

BUMP = dict(law="bump", amplitude=3.0, peak_temperature="1.8e5 K", width_dex=0.15,
            density_exponent=0.0, reference_density="1e-10 g/cm3")
STAR = dict(name="Veyla's Star, base twin (invented)", mass="10 Msun", X=0.7, Z=0.02,
            opacity=BUMP, rtol=1e-8)
# The base of configs/bump_wind.toml (photosphere 2e5 Lsun, 5e4 K) as the
# photosphere-anchored solve reports it, and what today's nested root-finds
# gave when anchored there (main at 9c66170, 2.1 s, 9,486 shots).
R0 = 35745453857.29598 * u.cm
L0 = 8.392420706804802e38 * u.erg / u.s
NESTED = {"mass_loss_rate": 1.319457289163405e21, "photosphere_temperature": 49999.999999945474,
          "photosphere_luminosity": 7.656000000613445e38}
GS = u.g / u.s


def base_twin(**changes):
    kw = dict(STAR, radius=R0, luminosity=L0, base_temperature="1e6 K")
    kw.update(changes)
    return DiffusionWind(**kw)


@pytest.fixture(scope="module")
def twin():
    return windsolve.solve(base_twin())


def test_base_anchor_gives_the_nested_answer_and_the_photosphere_back(twin):
    assert twin.converged, twin.message
    s = twin.summary
    for key, unit in (("mass_loss_rate", GS), ("photosphere_temperature", u.K),
                      ("photosphere_luminosity", u.erg / u.s)):
        assert s[key].to_value(unit) == pytest.approx(NESTED[key], rel=1e-8), key
    assert s["photosphere_temperature"].to_value(u.K) == pytest.approx(5e4, rel=1e-8)
    assert s["photosphere_luminosity"].to_value(u.Lsun) == pytest.approx(2e5, rel=1e-8)
    # the base it was asked for (to the residuals' noise, a few rtol)
    assert s["base_temperature"].to_value(u.K) == pytest.approx(1e6, rel=1e-6)
    assert s["base_luminosity"].to_value(u.erg / u.s) == pytest.approx(L0.value, rel=1e-6)
    # a few hundred shots, where the nested root-finds took 9,486
    assert twin.counters["shots"] < 1500


def test_base_density_anchor_gives_the_same_wind(twin):
    rho0 = twin.summary["base_density"]
    by_density = windsolve.solve(base_twin(base_temperature=None, base_density=rho0))
    assert by_density.converged, by_density.message
    for key in ("mass_loss_rate", "photosphere_temperature", "terminal_velocity"):
        assert (by_density.summary[key] / twin.summary[key]).decompose().value \
            == pytest.approx(1.0, rel=1e-8), key


@pytest.mark.parametrize("rtol", [1e-8, 1e-10])
@pytest.mark.parametrize("factor", [0.97, 1.03])
def test_a_warm_start_gives_the_cold_answer_in_fewer_shots(factor, rtol):
    # The residuals come from integrations to rtol, so two starts agree to
    # about rtol (measured: up to 8e-9 at rtol = 1e-8, 2e-11 at 1e-10).
    start = windsolve.solve(base_twin(rtol=rtol))
    model = base_twin(luminosity=L0 * factor, rtol=rtol)
    cold = windsolve.solve(model)
    warm = windsolve.solve(model, start_from=start)
    assert cold.converged and warm.converged, (cold.message, warm.message)
    for key in ("mass_loss_rate", "photosphere_temperature", "photosphere_luminosity"):
        assert (warm.summary[key] / cold.summary[key]).decompose().value \
            == pytest.approx(1.0, rel=2 * rtol), key
    assert warm.counters["shots"] < cold.counters["shots"]


def test_a_failed_or_foreign_start_is_ignored(twin):
    failed = windsolve.WindResult(twin.model, False, "no_solution", "none")
    for start in (failed, None):
        again = windsolve.solve(base_twin(), start_from=start)
        assert again.converged
        assert again.summary["mass_loss_rate"].to_value(GS) == pytest.approx(
            NESTED["mass_loss_rate"], rel=1e-8)
    # a photosphere-anchored model takes start_from and ignores it
    top = DiffusionWind(**STAR, photosphere_luminosity="2e5 Lsun",
                        photosphere_temperature="5e4 K", base_temperature="1e6 K")
    assert windsolve.solve(top, start_from=twin).summary["mass_loss_rate"].to_value(GS) \
        == windsolve.solve(top).summary["mass_loss_rate"].to_value(GS)


def test_base_anchored_sweep_rows_equal_lone_solves(tmp_path):
    from windsolve.sweep import load_sweep, read_sweep_table, run_sweep
    base = tmp_path / "twin.toml"
    base.write_text(
        'model = "diffusion"\nname = "twin (invented)"\n[star]\nmass = "10 Msun"\n'
        f'radius = "{float(R0.value)!r} cm"\nluminosity = "{float(L0.value)!r} erg/s"\n'
        '[composition]\nX = 0.7\nZ = 0.02\n[opacity]\nlaw = "bump"\namplitude = 3.0\n'
        'peak_temperature = "1.8e5 K"\nwidth_dex = 0.15\ndensity_exponent = 0.0\n'
        'reference_density = "1e-10 g/cm3"\n[boundary]\nbase_temperature = "1e6 K"\n'
        '[numerics]\nrtol = 1e-8\n')
    spec = tmp_path / "sweep.toml"
    spec.write_text(f'[sweep]\nbase = "{base}"\ndesign = "grid"\nbatch = 5\n[[axis]]\n'
                    'key = "star.luminosity"\nstart = "2.0e5 Lsun"\nstop = "2.4e5 Lsun"\n'
                    'num = 5\n')
    run_sweep(load_sweep(spec), tmp_path / "sweep.h5", workers=1, quiet=True)
    table, _ = read_sweep_table(tmp_path / "sweep.h5")
    assert table["converged"].all()
    for i, L in enumerate(np.linspace(2.0e5, 2.4e5, 5)):
        alone = windsolve.solve(base_twin(luminosity=L * u.Lsun))
        assert table["mass_loss_rate"][i] == pytest.approx(
            alone.summary["mass_loss_rate"].to_value(GS), rel=1e-8)


def test_base_families_scan_l0_and_r0_with_warm_starts(twin):
    from windsolve.family import solve_family
    family = solve_family(base_twin(), "base_luminosity", 2.0e5, 2.3e5, 4)
    assert family.converged.all(), family.ends
    for value, member in zip(family.values, family.members, strict=True):
        # each member is the model at that L0, solved alone to the same answer
        alone = windsolve.solve(base_twin(luminosity=value * u.Lsun))
        assert member.summary["mass_loss_rate"].to_value(GS) == pytest.approx(
            alone.summary["mass_loss_rate"].to_value(GS), rel=2e-8)
        assert member.summary["base_luminosity"].to_value(u.Lsun) == pytest.approx(value,
                                                                                  rel=1e-6)
    by_radius = solve_family(base_twin(), "base_radius", 0.45, 0.6, 3)
    assert by_radius.converged.all(), by_radius.ends
    assert by_radius.column("base_radius") / 6.957e10 == pytest.approx(  # IAU 2015 Rsun
        by_radius.values, rel=1e-9)


def test_base_family_says_where_it_starts_and_refuses_the_other_scans(tmp_path):
    from windsolve.errors import ModelError
    from windsolve.family import FamilyResult, solve_family
    family = solve_family(base_twin(), "base_luminosity", 1.6e5, 1.9e5, 3)
    assert not family.converged[0] and family.converged[-1]
    assert "the family starts between base_luminosity" in family.ends
    path = family.to_hdf5(tmp_path / "base_family.h5")
    again = FamilyResult.from_hdf5(path)
    assert again.scan == "base_luminosity"
    assert np.allclose(again.values, family.values, rtol=1e-12)
    with pytest.raises(ModelError, match="photosphere luminosity fixed"):
        solve_family(base_twin(), "photosphere_temperature", 3e4, 5e4, 2)
    top = DiffusionWind(**STAR, photosphere_luminosity="2e5 Lsun",
                        photosphere_temperature="5e4 K", base_temperature="1e6 K")
    with pytest.raises(ModelError, match="base temperature"):
        solve_family(top, "base_radius", 0.4, 0.5, 2)


def _cli_error(argv, capsys):
    from windsolve import cli
    assert cli.main(argv) == 2
    out, err = capsys.readouterr()
    assert err.strip() and "\n" not in err.strip(), err
    return err


def test_no_solution_says_which_way_to_move_the_photosphere(tmp_path, capsys):
    # bump_wind.toml at T_eff = 6e5 K has no solution; the hint names a T_eff
    # range at this L_ph that has, and a model there does converge.
    import re
    from pathlib import Path
    text = (Path(__file__).resolve().parents[1] / "configs" / "bump_wind.toml").read_text()
    bad = tmp_path / "hot.toml"
    bad.write_text(text.replace('photosphere_temperature = "5e4 K"',
                                'photosphere_temperature = "6e5 K"'))
    err = _cli_error(["run", str(bad), "-o", str(tmp_path / "hot.h5")], capsys)
    assert "no solution" in err and "at this L_ph, T_eff from" in err, err
    assert not (tmp_path / "hot.h5").exists()
    hi = float(re.search(r"T_eff from \S+(?: or lower)? to (\S+)", err).group(1))
    model = windsolve.load_model(bad).replace(photosphere_temperature=hi * u.K)
    assert windsolve.solve(model).converged


def test_no_solution_says_which_way_to_move_the_base(twin, tmp_path, capsys):
    # T0 below the sonic temperature: the subsonic base is hotter than the
    # sonic point (T rises inward, common practice), so T0 must go up.
    import re
    path = tmp_path / "cool_base.toml"
    path.write_text(
        'model = "diffusion"\nname = "twin (invented)"\n[star]\nmass = "10 Msun"\n'
        f'radius = "{float(R0.value)!r} cm"\nluminosity = "{float(L0.value)!r} erg/s"\n'
        '[composition]\nX = 0.7\nZ = 0.02\n[opacity]\nlaw = "bump"\namplitude = 3.0\n'
        'peak_temperature = "1.8e5 K"\nwidth_dex = 0.15\ndensity_exponent = 0.0\n'
        'reference_density = "1e-10 g/cm3"\n[boundary]\nbase_temperature = "2e5 K"\n')
    err = _cli_error(["run", str(path)], capsys)
    match = re.search(r"raise it above (\S+) K", err)
    assert match, err
    T_c = twin.summary["sonic_temperature"].to_value(u.K)  # 3.18e5 K
    assert float(match.group(1)) >= 0.9 * T_c
