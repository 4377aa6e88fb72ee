"""Model A answers honestly: no transonic solution is "no solution", a static atmosphere
is flagged, and the messages name the real cause (issue 10, items 2 and 4, two messages).

Tiers: (d) no result is accepted whose sonic point sits on the base; (a)/(b) outside
checks -- the critical-point condition and the subsonic branch evaluated here from the
equations in the docstring of ``windsolve.models.isothermal.kernels`` (Parker 1958 with a radiative
force, photon tiring as Owocki & Gayley 1997, porosity as Owocki, Gayley & Shaviv 2004,
eq. 4) with scipy; Parker's isothermal wind in closed form (Lamers & Cassinelli 1999,
"Introduction to Stellar Winds", ch. 3; Cranmer 2004, Am. J. Phys. 72, 1397); (e) the
command line says it in one line and writes nothing.
"""

import math
import os
import subprocess
import sys
import tomllib
from pathlib import Path

import astropy.constants as ac
import astropy.units as u
import h5py
import numpy as np
import pytest
from scipy.integrate import solve_ivp

import windsolve
from windsolve.cli import main as cli_main
from windsolve.modelfile import model_from_dict
from windsolve.sweep import load_sweep, read_sweep_table, run_sweep

ROOT = Path(windsolve.__file__).resolve().parents[1]  # the windsolve under test

G = ac.G.cgs.value
C = ac.c.cgs.value
MSUN = ac.M_sun.cgs.value
RSUN = ac.R_sun.cgs.value
LSUN = ac.L_sun.cgs.value
# Electron scattering per gram for X = 0.7, Z = 0.02 (fully ionized; electrons per
# atomic mass unit from the atomic masses of H and He, A/2 electrons for metals):
# sigma_T and m_u from astropy (CODATA).
X, Z = 0.7, 0.02
KAPPA = (ac.sigma_T.cgs.value / ac.u.cgs.value
         * (X / 1.008 + 2.0 * (1.0 - X - Z) / 4.002602 + Z / 2.0))


def run_cli(*argv, cwd):
    """``python -m windsolve ...`` as a user runs it: (returncode, stdout, stderr)."""
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    p = subprocess.run([sys.executable, "-m", "windsolve", *argv], cwd=cwd, env=env,
                       capture_output=True, text=True, timeout=300)
    return p.returncode, p.stdout, p.stderr


# -- item 2: no transonic solution ------------------------------------------------------

# The example of the issue: 20 Msun, 50 Rsun, Gamma_0 = 1.5 in electron scattering,
# a = 2 km/s, rho_0 = 1e-5 g/cm3, h_0 = 1e-5 R_0 with q = 1, photon tiring, r_out = 1000 R_0.
M2 = 20 * MSUN
R2 = 50 * RSUN
L2 = 1.5 * 4 * math.pi * G * M2 * C / KAPPA
A2 = 2e5
RHO2 = 1e-5
H2 = 1e-5 * R2
ROUT2 = 1000 * R2
YA = math.log(A2)


def porous_tiring_text(gamma=1.5, h=1e-5, a_kms=2.0, q=1.0):
    L = gamma * 4 * math.pi * G * M2 * C / KAPPA
    return f"""model = "isothermal"
name = "issue 10 item 2 (invented)"
[star]
mass = "20 Msun"
radius = "50 Rsun"
luminosity = "{L:.10e} erg/s"
[composition]
X = {X}
Z = {Z}
[gas]
sound_speed = "{a_kms} km/s"
[opacity]
law = "electron_scattering"
[porosity]
length = "{h * 50} Rsun"
radial_exponent = {q}
[boundary]
base_density = "1e-5 g/cm3"
[energy]
photon_tiring = true
[numerics]
outer_radius = "50000 Rsun"
"""


def test_example_without_transonic_solution_exits_2_and_writes_nothing(tmp_path):
    (tmp_path / "m.toml").write_text(porous_tiring_text())
    code, out, err = run_cli("run", "m.toml", "-o", "out.h5", cwd=tmp_path)
    assert code == 2
    assert out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert "no transonic solution" in lines[0]
    assert "no solution: no" not in lines[0]  # said once, not twice
    assert "base density above base_density" in lines[0]  # the reason, in words
    assert "rtol" not in lines[0]
    assert not (tmp_path / "out.h5").exists()
    assert list(tmp_path.iterdir()) == [tmp_path / "m.toml"]


def _N(r, y, mdot, a):
    """N(r, v = e^y) of the example, from the equations in core/isothermal.py's docstring.

    In logarithms, so that the deep subsonic layer (rho up to e^1000 rho0) neither
    overflows nor underflows: for clumps of optical depth tau > 50 the porosity factor
    (1 - e^-tau)/tau is 1/tau to 1e-22.
    """
    v0 = mdot / (4 * math.pi * R2**2 * RHO2)
    L = L2 - mdot * ((np.exp(2 * y) - v0 * v0) / 2 + G * M2 / R2 - G * M2 / r)
    ln_rho = np.log(mdot / (4 * math.pi * r * r)) - y
    ln_tau = np.log(KAPPA * H2 * (r / R2)) + ln_rho  # h = h0 (r/R0)^q, q = 1
    tau = np.exp(np.minimum(ln_tau, 50.0))
    factor = np.where(ln_tau > 50.0, np.exp(-ln_tau),
                      np.where(tau < 1e-8, 1 - tau / 2, -np.expm1(-tau) / tau))
    return 2 * a * a / r - G * M2 / r**2 + KAPPA * factor * L / (4 * math.pi * r**2 * C)


def _base_mismatch(mdot, rc):
    """ln rho(R0) - ln rho0 along the subsonic branch of the saddle at rc (scipy DOP853).

    The accelerating slope p at (rc, a) solves 2 p^2 - N_v p - N_r = 0 (L'Hopital on
    (v - a^2/v) v' = N); the leg starts 1e-6 rc inside and integrates d ln v/dr =
    N/(v^2 - a^2) down to R0.  None when the branch turns back to v = a before R0.
    """
    a = A2
    ya = math.log(a)
    hr, hv = 1e-6 * rc, 1e-6 * a
    n_r = (_N(rc + hr, ya, mdot, a) - _N(rc - hr, ya, mdot, a)) / (2 * hr)
    n_v = (_N(rc, math.log(a + hv), mdot, a) - _N(rc, math.log(a - hv), mdot, a)) / (2 * hv)
    p = (n_v + math.sqrt(n_v * n_v + 8 * n_r)) / 4
    r1 = rc * (1 - 1e-6)

    def rhs(r, y):
        return [float(_N(r, y[0], mdot, a)) / (math.exp(2 * y[0]) - a * a)]

    def back_to_sonic(r, y):
        return math.exp(2 * y[0]) - (1 - 1e-3) * a * a

    back_to_sonic.terminal = True
    back_to_sonic.direction = 1  # v rising back to a (it starts just below a, falling)
    sol = solve_ivp(rhs, (r1, R2), [math.log(a - p * (rc - r1))], method="DOP853",
                    rtol=1e-9, atol=1e-9, events=back_to_sonic)
    assert sol.status >= 0, sol.message  # reached R0 or turned back, never gave up
    if sol.status == 1:
        return None
    return math.log(mdot / (4 * math.pi * R2**2)) - sol.y[0, -1] - math.log(RHO2)


@pytest.mark.slow
def test_example_has_no_transonic_solution_by_an_independent_calculation():
    # Every mass-loss rate with a subsonic base (v0 < a, Mdot < 4 pi R0^2 rho0 a) down to
    # e^-40 of that: below, the porosity factor is 1 to 1e-9 and Gamma = 1.5 (1 - Mdot
    # R0 / (L0 R0/GM) ...) > 1 everywhere, so N(r, a) > 0 and there is no critical point.
    mdot_max = 4 * math.pi * R2**2 * RHO2 * A2
    r = np.geomspace(R2, ROUT2, 6000)
    saddles = 0
    for ln_m in np.linspace(math.log(mdot_max) - 40, math.log(mdot_max) - 1e-6, 4001):
        mdot = math.exp(ln_m)
        n = _N(r, YA, mdot, A2)
        for i in np.nonzero(np.sign(n[1:]) != np.sign(n[:-1]))[0]:
            lo, hi = r[i], r[i + 1]  # bisect the root of N(r, a)
            for _ in range(80):
                mid = 0.5 * (lo + hi)
                same = np.sign(_N(mid, YA, mdot, A2)) == np.sign(n[i])
                lo, hi = (mid, hi) if same else (lo, mid)
            rc = 0.5 * (lo + hi)
            hr = 1e-6 * rc
            n_r = (_N(rc + hr, YA, mdot, A2) - _N(rc - hr, YA, mdot, A2)) / (2 * hr)
            if not n_r > 0:
                continue  # N_r <= 0: a node or focus, no transonic solution passes
            saddles += 1
            g = _base_mismatch(mdot, rc)
            # through this saddle the subsonic solution never meets rho0: it reaches R0
            # far too dense (or turns back to the sound speed before R0)
            assert g is None or g > 10, (mdot, rc / R2, g)
    assert saddles > 5  # the window of saddles was sampled, not missed
    result = windsolve.solve(_model_from_text(porous_tiring_text()))
    assert not result.converged and not result.profile
    assert math.isnan(result.summary["mass_loss_rate"].value)


def _model_from_text(text):
    return model_from_dict(tomllib.loads(text), source="test")


# The class: variants of the example; before, four of them came back as a "solution" whose
# sonic point sat on the base (status failed, a profile, r_c = R0).
@pytest.mark.parametrize("gamma, h, a_kms, q", [
    (1.5, 1e-5, 2.0, 1.0), (1.3, 1e-5, 2.0, 1.0), (1.3, 1e-5, 5.0, 1.0),
    (1.3, 1e-5, 5.0, 0.0), (1.5, 1e-4, 2.0, 1.0), (2.0, 1e-5, 2.0, 1.0)])
def test_no_answer_has_its_sonic_point_on_the_base(gamma, h, a_kms, q):
    model = _model_from_text(porous_tiring_text(gamma, h, a_kms, q))
    result = windsolve.solve(model)
    if not result.profile:  # no solution: said in words, no numbers
        assert not result.converged
        assert "no transonic solution" in result.message
        return
    # A solution is a transonic wind from a subsonic base through rho(R0) = rho0.
    R0 = model.cgs("radius")
    rc = result.summary["sonic_radius"].to_value(u.cm)
    assert result.converged, result.message
    assert rc > R0 * (1 + 1e-6)
    assert result.profile["velocity"][0].to_value(u.cm / u.s) < model.a
    # (to the accuracy of the stored profile's own integration, not the shooting's)
    assert result.profile["density"][0].to_value(u.g / u.cm**3) == pytest.approx(1e-5,
                                                                                  rel=1e-4)


@pytest.mark.parametrize("eps, solution", [(1e-7, False), (1e-3, True)])
def test_parker_wind_with_its_sonic_point_on_the_base_is_no_solution(eps, solution):
    # Parker (1958): without radiation r_c = GM/(2a^2) whatever the density.  With the base
    # at r_c / (1 + 1e-7) the sonic point lies within the solver's 1e-6 r_c start offset of
    # the base: there is no subsonic part to integrate, and it used to be "converged".
    M, a = 10 * MSUN, 100e5
    rc = G * M / (2 * a * a)
    model = windsolve.IsothermalWind(name="Parker on its base (invented)", mass=M * u.g,
                                     radius=rc / (1 + eps) * u.cm, luminosity=0 * u.Lsun,
                                     sound_speed=a * u.cm / u.s, base_density="1e-12 g/cm3",
                                     outer_radius=60 * rc * u.cm)
    result = windsolve.solve(model)
    if solution:
        assert result.converged
        assert result.summary["sonic_radius"].to_value(u.cm) == pytest.approx(rc, rel=1e-9)
        return
    assert result.status == "sonic_point_on_base"
    assert not result.converged and not result.profile
    assert "sonic point on the base" in result.message
    assert "smaller [star] radius" in result.message


# -- the two wrong messages -------------------------------------------------------------

def test_outer_radius_inside_the_sonic_point_says_so(tmp_path):
    # The demo (sonic point at 1.0284 R0 = 102.84 Rsun) with the outer radius at 102 Rsun:
    # it used to say "lower base_density".
    text = Path(windsolve.demo_model_path()).read_text().replace(
        'outer_radius = "10000 Rsun"', 'outer_radius = "102 Rsun"')
    assert '"102 Rsun"' in text
    (tmp_path / "m.toml").write_text(text)
    code, out, err = run_cli("run", "m.toml", "-o", "out.h5", cwd=tmp_path)
    lines = err.strip().splitlines()
    assert code == 2 and len(lines) == 1, err
    assert "outer radius lies inside the sonic point" in lines[0]
    assert "raise numerics.outer_radius" in lines[0]
    assert "base_density" not in lines[0].split(";")[-1]  # the advice is not the density
    assert not (tmp_path / "out.h5").exists()
    # the advice works: the demo converges with its sonic point beyond 102 Rsun
    good = _model_from_text(text).replace(outer_radius=200 * u.Rsun)
    result = windsolve.solve(good)
    assert result.converged
    assert result.summary["sonic_radius"].to_value(u.Rsun) > 102


@pytest.mark.parametrize("a_kms, gamma", [(400.0, 0.5), (250.0, 0.5)])
def test_thermally_unbound_gas_is_not_called_super_eddington(tmp_path, a_kms, gamma):
    # Parker's sonic point GM(1 - Gamma)/(2 a^2) inside R0: the gas pressure, not the
    # radiation, unbinds it.  Checked here first: a^2 > GM(1 - Gamma)/(2 R0).
    text = (ROOT / "configs" / "parker_reference.toml").read_text().replace(
        'sound_speed = "100 km/s"', f'sound_speed = "{a_kms} km/s"')
    M, R0 = 10 * MSUN, 11.9 * RSUN
    assert (a_kms * 1e5) ** 2 > G * M * (1 - gamma) / (2 * R0)
    (tmp_path / "m.toml").write_text(text)
    code, out, err = run_cli("run", "m.toml", cwd=tmp_path)
    lines = err.strip().splitlines()
    assert code == 2 and len(lines) == 1, err
    assert "thermally unbound" in lines[0]
    assert "sound speed" in lines[0]
    assert "super-Eddington" not in lines[0]
    if a_kms ** 2 * 1e10 > G * M / (2 * R0):  # unbound even without radiation
        assert "whatever the radiation does" in lines[0]


# -- item 4: a hydrostatic atmosphere is not a wind -------------------------------------

COOL = """model = "isothermal"
name = "a cool star without radiative driving (invented)"
[star]
mass = "10 Msun"
radius = "10 Rsun"
luminosity = "0 Lsun"
[gas]
sound_speed = "{a}"
[opacity]
law = "electron_scattering"
[boundary]
base_density = "1e-9 g/cm3"
[numerics]
outer_radius = "3000 Rsun"
"""


def test_sub_eddington_cool_model_is_flagged_hydrostatic(tmp_path):
    model = _model_from_text(COOL.format(a="60 km/s"))
    result = windsolve.solve(model)
    assert result.converged
    assert result.hydrostatic
    text = str(result)
    assert "HYDROSTATIC" in text and "not a wind" in text
    assert "hydrostatic atmosphere, not a wind" in result.message
    # Parker's isothermal wind (no radiation): r_c = GM/(2a^2), and below the sonic point
    # v/a = (r_c/r)^2 exp(3/2 - 2 r_c/r) exp(-(v/a)^2/2) exactly (the implicit solution,
    # Lamers & Cassinelli 1999, ch. 3; Cranmer 2004): with v0/a ~ 1e-20 the last factor
    # is 1, so Mdot = 4 pi R0^2 rho0 a (r_c/R0)^2 exp(3/2 - 2 r_c/R0) and
    # ln(rho0/rho_c) = 2 r_c/R0 - 3/2.
    a, R0, rho0 = 60e5, 10 * RSUN, 1e-9
    x = G * 10 * MSUN / (2 * a * a) / R0
    mdot = 4 * math.pi * R0**2 * rho0 * a * x**2 * math.exp(1.5 - 2 * x)
    assert result.summary["mass_loss_rate"].to_value(u.g / u.s) == pytest.approx(mdot, rel=1e-5)
    efolds = result.summary["base_density_efolds"].to_value(u.one)
    assert efolds == pytest.approx(2 * x - 1.5, rel=1e-6)
    assert efolds > 30
    result.to_hdf5(tmp_path / "cool.h5")
    with h5py.File(tmp_path / "cool.h5") as f:
        assert bool(f["summary"].attrs["hydrostatic"]) is True
    assert windsolve.WindResult.from_hdf5(tmp_path / "cool.h5").hydrostatic


def test_parker_reference_wind_is_not_flagged(tmp_path):
    result = windsolve.solve(windsolve.load_model(ROOT / "configs" / "parker_reference.toml"))
    assert result.converged and not result.hydrostatic
    assert "HYDROSTATIC" not in str(result)
    result.to_hdf5(tmp_path / "p.h5")
    with h5py.File(tmp_path / "p.h5") as f:
        assert bool(f["summary"].attrs["hydrostatic"]) is False


def test_sweep_table_has_the_hydrostatic_column(tmp_path):
    base = tmp_path / "cool.toml"
    base.write_text(COOL.format(a="60 km/s"))
    path = tmp_path / "sweep.toml"
    # 60 km/s: r_c = 26.5 R0, a static base; 200 km/s: r_c = 2.4 R0, a wind.
    path.write_text(f'[sweep]\nbase = "{base}"\ndesign = "grid"\n[[axis]]\n'
                    f'key = "gas.sound_speed"\nvalues = ["60 km/s", "200 km/s"]\n')
    out = tmp_path / "out.h5"
    run = run_sweep(load_sweep(path), out, workers=1, quiet=True)
    assert not run.interrupted and (run.rows, run.done, run.hydrostatic) == (2, 2, 1)
    table, attrs = read_sweep_table(out)
    assert list(table["converged"]) == [True, True]
    assert list(table["hydrostatic"]) == [True, False]
    assert table["base_density_efolds"][0] > 30 > table["base_density_efolds"][1]


def test_sweep_command_counts_the_hydrostatic_rows(tmp_path, capsys):
    base = tmp_path / "cool.toml"
    base.write_text(COOL.format(a="60 km/s"))
    path = tmp_path / "sweep.toml"
    # 60 and 70 km/s: r_c = 26.5 and 19.5 R0 (static bases); 200 km/s: r_c = 2.4 R0, a wind.
    path.write_text(f'[sweep]\nbase = "{base}"\ndesign = "grid"\n[[axis]]\n'
                    f'key = "gas.sound_speed"\nvalues = ["60 km/s", "70 km/s", "200 km/s"]\n')
    code = cli_main(["sweep", str(path), "-o", str(tmp_path / "out.h5"), "--workers", "1"])
    assert code == 0
    out = capsys.readouterr().out
    assert "2 converged models have a hydrostatic base" in out


def test_porous_model_unbound_at_the_sonic_density_is_not_told_to_add_porosity():
    # The demo already has porosity; with rho0 = 1e-14 g/cm3 every sonic density is too thin
    # for the clumps to matter (tau_b = kappa rho h0 < 1e-2), so the base is unbound.
    model = windsolve.load_model(windsolve.demo_model_path()).replace(
        base_density=1e-14 * u.g / u.cm**3)
    assert KAPPA * 1e-14 * 10 * RSUN < 1e-2
    result = windsolve.solve(model)
    assert result.status == "no_critical_point" and not result.profile
    assert "needs porosity" not in result.message
    assert "raise base_density or shorten porosity.length" in result.message
