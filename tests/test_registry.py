"""A third wind model, defined and registered here, runs through the whole program.

The model is Parker's isothermal wind with a constant Eddington factor Gamma
(gravity GM(1 - Gamma)), solved in closed form with the Lambert W function
(Cranmer 2004, Am. J. Phys. 72, 1397).  Nothing in the package knows it: it is
one model class, one solve function and one :func:`windsolve.registry.register`
call, all in this file.  It then goes through ``windsolve.solve``, the result
file (``to_hdf5`` / ``from_hdf5``), ``windsolve check`` and a sweep.

Its numbers are checked against references outside this file's solver: the
isothermal momentum equation recomputed by finite differences from the
profile, and windsolve's Model A (a numerical shooting solution) for the same
star, whose opacity (electron scattering) keeps Gamma constant.
"""

import math
from dataclasses import dataclass
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from scipy.special import lambertw

import windsolve
from windsolve.cli import main
from windsolve.models import WindModel, param
from windsolve.registry import ModelSpec, register, spec_for
from windsolve.result import WindResult

CONFIGS = Path(__file__).resolve().parent.parent / "configs"
G_CGS = 6.6743e-8  # CODATA 2018/2022 Newtonian constant [cm3 g-1 s-2]
KIND = "parker_test"


@dataclass(frozen=True, eq=False)
class ParkerWind(WindModel):
    """Test-only model: Parker's isothermal wind under gravity GM(1 - Gamma)."""

    kind = KIND
    sections = ("star", "gas", "boundary", "opacity", "numerics")

    name: str = param("name", str, "a label for the star", "unnamed star")
    mass: object = param("star.mass", u.g, "stellar mass M", check="positive")
    radius: object = param("star.radius", u.cm, "base radius R0", check="positive")
    eddington_factor: float = param("star.eddington_factor", float,
                                    "constant Eddington factor Gamma", 0.0, "fraction")
    sound_speed: object = param("gas.sound_speed", u.cm / u.s, "isothermal sound speed a",
                                check="positive")
    base_density: object = param("boundary.base_density", u.g / u.cm**3,
                                 "density at R0", check="positive")
    opacity: object = None
    outer_radius: object = param("numerics.outer_radius", u.cm, "outer radius", None,
                                 "positive")

    def __post_init__(self):
        self._read_fields()
        if self.outer_radius is None:
            object.__setattr__(self, "outer_radius", 100.0 * self.radius)


def solve_parker(model, profile=True):
    """Closed form: v/a = sqrt(-W_k(-D)), D = (rc/r)^4 exp(3 - 4 rc/r), k = 0 below r_c,
    k = -1 above (Cranmer 2004, eqs. for the isothermal Parker wind)."""
    M, R0, a = model.cgs("mass"), model.cgs("radius"), model.cgs("sound_speed")
    rc = G_CGS * M * (1.0 - model.eddington_factor) / (2.0 * a * a)
    cm_s = u.cm / u.s
    summary = {"sonic_radius": rc * u.cm, "sonic_velocity": a * cm_s,
               "outer_radius": model.outer_radius.to(u.cm),
               "base_eddington_factor": model.eddington_factor * u.one}
    if not rc > R0:
        return WindResult(model, False, "no_solution", "r_c lies inside R0", summary)
    r = np.geomspace(R0, model.cgs("outer_radius"), 600)
    x = r / rc
    D = x**-4 * np.exp(3.0 - 4.0 / x)
    w = np.where(x < 1, -lambertw(-D, 0).real, -lambertw(-D, -1).real)
    v = a * np.sqrt(w)
    mdot = 4.0 * math.pi * R0**2 * model.cgs("base_density") * v[0]
    rho = mdot / (4.0 * math.pi * r**2 * v)
    summary.update(mass_loss_rate=mdot * u.g / u.s, terminal_velocity=v[-1] * cm_s)
    prof = {"radius": r * u.cm, "velocity": v * cm_s, "density": rho * u.g / u.cm**3}
    return WindResult(model, True, "converged", f"converged: Parker wind, r_c = {rc / R0:.5g} R0",
                      summary, prof if profile else {}, [], {"shots": 0, "seconds": 0.0})


def check_parker(model, source):
    rc = (G_CGS * model.cgs("mass") * (1 - model.eddington_factor)
          / (2 * model.cgs("sound_speed") ** 2))
    return ([("model", f"{model.kind} ({source})"),
             ("sonic radius GM(1 - Gamma)/(2a^2)", f"{rc / model.cgs('radius'):.4g} R0")], [])


PARKER_SPEC = ModelSpec(
    kind=KIND, model_class=ParkerWind, solve=solve_parker, check=check_parker,
    summary_units={"mass_loss_rate": u.g / u.s, "terminal_velocity": u.cm / u.s,
                   "sonic_radius": u.cm, "sonic_velocity": u.cm / u.s, "outer_radius": u.cm,
                   "base_eddington_factor": u.dimensionless_unscaled},
    sweep_batch=1, terminal_label="velocity at outer radius")
# At import, so that sweep workers (which import this module, see
# windsolve.registry.plugin_modules) know the model too.
register(PARKER_SPEC, replace=True)


@pytest.fixture(scope="module", autouse=True)
def registered():
    """The test model is known while this file's tests run, and gone after them."""
    from windsolve.registry import unregister
    register(PARKER_SPEC, replace=True)
    yield
    unregister(KIND)


@pytest.fixture(scope="module")
def reference():
    """The Parker reference star solved by Model A, and the same star as a ParkerWind."""
    model_a = windsolve.load_model(CONFIGS / "parker_reference.toml")
    result_a = windsolve.solve(model_a)
    assert result_a.converged
    gamma = float(result_a.summary["base_eddington_factor"].value)
    parker = ParkerWind(name="Lindqvist's Star (invented), Parker form", mass=model_a.mass,
                        radius=model_a.radius, eddington_factor=gamma,
                        sound_speed=model_a.sound_speed, base_density=model_a.base_density,
                        outer_radius=model_a.outer_radius)
    return result_a, parker


def write_model(tmp_path, parker):
    from windsolve.modelfile import dumps
    path = tmp_path / "parker.toml"
    path.write_text(dumps(parker.to_dict()))
    return path


def test_registered_model_solves_through_windsolve_solve(reference):
    result_a, parker = reference
    result = windsolve.solve(parker)
    assert result.converged and result.status == "converged"
    assert spec_for(parker) is PARKER_SPEC
    # windsolve's Model A (numerical shooting) for the same star agrees with the closed form.
    for key, rtol in (("mass_loss_rate", 1e-5), ("sonic_radius", 1e-5),
                      ("terminal_velocity", 1e-5)):
        assert result.summary[key].cgs.value == pytest.approx(result_a.summary[key].cgs.value,
                                                              rel=rtol), key
    # Momentum equation of an isothermal wind, by finite differences from the profile
    # (independent of the Lambert W solution): v dv/dr = -a^2 dln(rho)/dr - GM(1-Gamma)/r^2.
    r = result.profile["radius"].value
    v = result.profile["velocity"].value
    rho = result.profile["density"].value
    a = parker.cgs("sound_speed")
    gm = G_CGS * parker.cgs("mass") * (1 - parker.eddington_factor)
    lhs = v * np.gradient(v, r)
    rhs = -a * a * np.gradient(np.log(rho), r) - gm / r**2
    scale = np.abs(gm / r**2)
    assert np.max(np.abs(lhs - rhs)[1:-1] / scale[1:-1]) < 1e-3
    text = "\n".join(result.summary_lines())
    assert "velocity at outer radius" in text and f"({KIND} wind)" in text


def test_registered_model_round_trips_through_hdf5(reference, tmp_path):
    _, parker = reference
    result = windsolve.solve(parker)
    result.to_hdf5(tmp_path / "parker.h5")
    back = windsolve.read_result(tmp_path / "parker.h5")
    assert back.model is not None and back.model.kind == KIND
    assert back.model.eddington_factor == parker.eddington_factor
    assert back.converged and back.status == "converged"
    for key, q in result.summary.items():
        assert back.summary[key].cgs.value == q.cgs.value, key
    for key, q in result.profile.items():
        np.testing.assert_array_equal(back.profile[key].cgs.value, q.cgs.value)


def test_check_prints_what_the_spec_says(reference, tmp_path, capsys):
    _, parker = reference
    path = write_model(tmp_path, parker)
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    rc = G_CGS * parker.cgs("mass") * (1 - parker.eddington_factor) / (
        2 * parker.cgs("sound_speed") ** 2)
    assert f"{rc / parker.cgs('radius'):.4g} R0" in out
    assert f"{KIND} ({path})" in out


def test_registered_model_runs_a_two_row_sweep(reference, tmp_path):
    from windsolve.sweep import load_sweep, read_sweep_table, run_sweep
    result_a, parker = reference
    model_path = write_model(tmp_path, parker)
    sweep_path = tmp_path / "sweep.toml"
    sweep_path.write_text(f'[sweep]\nbase = "{model_path}"\ndesign = "grid"\n'
                          f'[[axis]]\nkey = "boundary.base_density"\n'
                          f'values = ["1e-12 g/cm3", "2e-12 g/cm3"]\n')
    sweep = load_sweep(sweep_path)
    assert len(sweep) == 2
    out = tmp_path / "sweep.h5"
    run_sweep(sweep, out, workers=1, quiet=True)
    columns, _ = read_sweep_table(out)
    assert list(columns["converged"]) == [True, True]
    assert list(columns["status"]) == ["converged", "converged"]
    # Mdot = 4 pi R0^2 rho0 v0 with v0 fixed by r_c: proportional to rho0 (Parker 1958;
    # Cranmer 2004), and the first row is the Model A reference star.
    mdot = columns["mass_loss_rate"]
    assert mdot[0] == pytest.approx(result_a.summary["mass_loss_rate"].cgs.value, rel=1e-5)
    assert mdot[1] / mdot[0] == pytest.approx(2.0, rel=1e-12)


def test_a_kind_cannot_be_registered_twice():
    with pytest.raises(ValueError, match="already registered"):
        register(PARKER_SPEC)


# -- the status vocabulary ------------------------------------------------------------------

@pytest.mark.parametrize("changes", [{}, {"luminosity": "5e5 Lsun"},
                                     {"sound_speed": "1000 km/s"}])
def test_every_status_a_solve_reports_is_in_the_vocabulary(changes, tmp_path):
    from windsolve.status import STATUSES
    model = windsolve.load_model(CONFIGS / "parker_reference.toml").replace(**changes)
    result = windsolve.solve(model)
    assert result.status in STATUSES
    assert result.converged == (result.status == "converged")
    result.to_hdf5(tmp_path / "r.h5")
    assert windsolve.read_result(tmp_path / "r.h5").status == result.status


def test_the_vocabulary_has_one_line_per_status_and_the_writer_refuses_others(tmp_path):
    from windsolve.status import STATUSES
    for status, meaning in STATUSES.items():
        assert status.isidentifier() and status.islower()
        assert meaning and "\n" not in meaning
    model = windsolve.load_model(CONFIGS / "parker_reference.toml")
    bogus = WindResult(model, False, "went_wrong", "a status outside the vocabulary", {})
    with pytest.raises(ValueError, match="STATUSES"):
        bogus.to_hdf5(tmp_path / "bogus.h5")
    assert not (tmp_path / "bogus.h5").exists()


def test_builtin_specs_name_every_summary_value_their_solvers_report():
    # What the registry says a model reports is what its solver reports (demo: Model A,
    # bump_wind: Model B), in the units the result file writes.
    from windsolve.result import SUMMARY_UNITS
    for config in ("demo.toml", "bump_wind.toml"):
        model = windsolve.load_model(CONFIGS / config)
        spec = spec_for(model)
        result = windsolve.solve(model, profile=False)
        assert result.converged
        assert set(result.summary) == set(spec.summary_units), config
        for key, unit in spec.summary_units.items():
            assert SUMMARY_UNITS[key] == unit
            assert result.summary[key].unit.is_equivalent(unit)


# -- the unit-free result type -----------------------------------------------------------------

def test_the_status_vocabulary_has_one_home_that_result_re_exports():
    import windsolve.result
    import windsolve.status
    assert windsolve.result.STATUSES is windsolve.status.STATUSES


@pytest.mark.parametrize("fixture", ["demo_result", "bump_result"])
def test_a_result_is_its_unit_free_solution_with_units(fixture, request):
    """WindResult.from_cgs(model, result.to_cgs()) gives the result back, value for value
    (both models: from_cgs is the only place a solver's cgs numbers get their units)."""
    from windsolve.result import PROFILE_UNITS, SUMMARY_UNITS, SolutionCGS
    result = request.getfixturevalue(fixture)
    solution = result.to_cgs()
    assert isinstance(solution, SolutionCGS)
    assert all(isinstance(v, float) for v in solution.summary.values())
    assert solution.ln_mdot == pytest.approx(math.log(solution.summary["mass_loss_rate"]),
                                             rel=1e-15)
    again = WindResult.from_cgs(result.model, solution)
    assert (again.converged, again.status, again.message) == (result.converged, result.status,
                                                              result.message)
    assert list(again.summary) == list(result.summary)
    for key, q in result.summary.items():
        assert again.summary[key].unit == SUMMARY_UNITS[key]
        assert again.summary[key].to_value(q.unit) == pytest.approx(q.value, rel=1e-15,
                                                                     nan_ok=True)
    assert list(again.profile) == [k for k in PROFILE_UNITS if k in result.profile]
    for key, q in result.profile.items():
        assert np.array_equal(again.profile[key].to_value(q.unit), q.value)


def test_model_a_cgs_solve_is_what_solve_reports(demo_model, demo_result):
    """The cgs solve (what sweep rows use) carries the numbers solve() shows, in cgs."""
    from windsolve.models.isothermal import solve_isothermal_cgs
    from windsolve.result import PROFILE_UNITS, SUMMARY_UNITS
    solution = solve_isothermal_cgs(demo_model)
    assert solution.status == demo_result.status and solution.widths is None
    for key, q in demo_result.summary.items():
        assert solution.summary[key] == q.to_value(SUMMARY_UNITS[key]), key
    assert math.exp(solution.ln_mdot) == solution.summary["mass_loss_rate"]
    for key, q in demo_result.profile.items():
        assert np.array_equal(solution.profile[key], q.to_value(PROFILE_UNITS[key])), key
    assert np.all(solution.profile["temperature"] == demo_model.T)
    # without a profile: the outer end only (the base Eddington factor then comes from the
    # base speed Mdot / (4 pi R0^2 rho0) instead of the integrated one: equal to ~1e-9)
    short = solve_isothermal_cgs(demo_model, profile=False)
    assert short.profile == {} and short.summary["mass_loss_rate"] == (
        solution.summary["mass_loss_rate"])
