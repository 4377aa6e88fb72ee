"""The OPAL multi-composition reader and the real table it ships (GN93hz).

References, named beside each check:

* the published file itself (Iglesias & Rogers 1996, ApJ 464, 943; Grevesse &
  Noels 1993 mixture), shipped as windsolve/data/opacity/GN93hz: values typed in
  below from the file (table number, log T, log R), and a few-line parser
  written here (:func:`independent_tables`) that shares no code with windsolve;
* independent interpolants from scipy (BarycentricInterpolator for the
  composition Lagrange scheme, RegularGridInterpolator for the 2-D one);
* common practice: the high-T low-R limit is electron scattering (within the
  few per cent of Compton corrections), the iron bump sits near log T 5.2-5.3.
"""

import hashlib
import math
import re
from pathlib import Path

import numpy as np
import pytest

from windsolve import tables
from windsolve.errors import ModelError
from windsolve.opacity import Opacity, opacity_value

PACKAGED = Path(tables.__file__).resolve().parent / "data" / "opacity" / "GN93hz"
LINES = PACKAGED.read_text(encoding="latin-1").splitlines()


def independent_tables():
    """{number: (X, Z, log_T (70,), values (70, 19) with NaN)} by fixed columns.

    The file's own description: each table block is a ``TABLE #`` line, two
    header lines and 70 rows, each log T in columns 1-4 then 19 fields of 7
    characters; 9.999 or blank is outside the table.
    """
    out = {}
    for k, line in enumerate(LINES):
        m = re.match(r"TABLE #\s*(\d+)\s+\S+ \S+\s+X=(\S+) Y=\S+ Z=(\S+)", line)
        if not m or not LINES[k + 4].startswith("logT"):
            continue
        rows = LINES[k + 6:k + 76]
        log_T = np.array([float(r[:4]) for r in rows])
        vals = np.full((70, 19), np.nan)
        for i, r in enumerate(rows):
            for j in range(19):
                field = r[4 + 7 * j:11 + 7 * j].strip()
                if field and field != "9.999":
                    vals[i, j] = float(field)
        out[int(m.group(1))] = (float(m.group(2)), float(m.group(3)), log_T, vals)
    return out


@pytest.fixture(scope="module")
def published():
    return independent_tables()


@pytest.fixture(scope="module")
def opal():
    return tables.read_opal(PACKAGED)


def kernel(X, Z, path="GN93hz", **kw):
    return Opacity("table", path=path, **kw).kernel_vector(X, Z)


def log_kappa_at(O, log_T, log_R):
    rho = 10.0 ** (log_R + 3.0 * log_T - 18.0)
    return math.log10(opacity_value.lite(O, rho, 10.0 ** log_T))


def test_shipped_file_is_the_published_one():
    # md5 and size of the published file, as windsolve/data/opacity/README.md records them
    data = PACKAGED.read_bytes()
    assert len(data) == 1_227_876
    assert hashlib.md5(data).hexdigest() == "2460d83d1998c7e61c862b68bb7da4a2"


def test_composition_list_has_126_entries(opal, published):
    # the file's summary: "There are 126 tables"; blocks counted by the parser above
    assert len(opal.compositions) == 126 == len(published)
    assert [c.number for c in opal.compositions] == list(range(1, 127))
    assert opal.mixture == "G&N'93 Solar"
    by_number = {c.number: c for c in opal.compositions}
    # typed from the file's table list
    assert (by_number[73].X, by_number[73].Y, by_number[73].Z) == (0.7, 0.28, 0.02)
    assert (by_number[8].X, by_number[8].Z) == (0.0, 0.02)
    assert (by_number[126].X, by_number[126].Z) == (0.92, 0.08)
    assert opal.log_T.size == 70 and opal.log_R.size == 19


def test_every_value_equals_the_independent_parse(opal, published):
    for k, c in enumerate(opal.compositions):
        X, Z, log_T, vals = published[c.number]
        assert (c.X, c.Z) == (X, Z)
        np.testing.assert_array_equal(opal.log_T, log_T)
        np.testing.assert_array_equal(opal.log_kappa[k], vals)  # NaN at the same places


@pytest.mark.parametrize(("X", "Z", "log_T", "log_R", "expected"), [
    # typed from GN93hz: table 73 (X=0.70, Z=0.02)
    (0.7, 0.02, 3.75, -8.0, -0.767),
    (0.7, 0.02, 5.30, -8.0, -0.281),
    (0.7, 0.02, 5.30, 1.0, 4.022),
    (0.7, 0.02, 5.35, -4.0, 0.842),
    (0.7, 0.02, 8.70, -1.5, -1.051),
    # table 8 (X=0, Z=0.02)
    (0.0, 0.02, 3.75, -6.5, -3.233),
    (0.0, 0.02, 5.40, -8.0, -0.638),
    (0.0, 0.02, 5.45, -4.0, 0.615),
])
def test_exact_composition_reproduces_published_nodes(X, Z, log_T, log_R, expected):
    table = tables.read_table(PACKAGED, X=X, Z=Z)
    i = int(np.flatnonzero(np.isclose(table.log_T, log_T))[0])
    j = int(np.flatnonzero(np.isclose(table.log_R, log_R))[0])
    assert table.log_kappa[i, j] == expected
    # and the kernel, at the node, through the model-file law (path = "GN93hz")
    assert log_kappa_at(kernel(X, Z), log_T, log_R) == pytest.approx(expected, abs=1e-9)


def test_holes_at_the_right_places():
    t73 = tables.read_table(PACKAGED, X=0.7, Z=0.02)
    t8 = tables.read_table(PACKAGED, X=0.0, Z=0.02)
    # GN93hz table 73, log T = 8.70: 14 values, blank from log R = -1.0 on
    row = t73.log_kappa[-1]
    assert np.isfinite(row[:14]).all() and np.isnan(row[14:]).all()
    # table 8, log T = 3.75: 9.999 at log R = -8.0, -7.5, -7.0; -3.233 at -6.5
    assert np.isnan(t8.log_kappa[0, :3]).all() and t8.log_kappa[0, 3] == -3.233
    O = kernel(0.0, 0.02)
    # in the hole: no value
    assert math.isnan(opacity_value.lite(O, 10 ** (-7.8 + 3 * 3.77 - 18), 10 ** 3.77))
    # a cell with finite nodes at log R -6.5 but touching the hole at -7.0: no value
    assert math.isnan(opacity_value.lite(O, 10 ** (-6.75 + 3 * 3.775 - 18), 10 ** 3.775))
    # the next cell (all four nodes finite): a value
    assert math.isfinite(opacity_value.lite(O, 10 ** (-6.25 + 3 * 3.775 - 18), 10 ** 3.775))
    # beyond the ragged high-R edge at high T (table 73 at log T 8.6: 14 columns)
    O73 = kernel(0.7, 0.02)
    assert math.isnan(opacity_value.lite(O73, 10 ** (-0.5 + 3 * 8.6 - 18), 10 ** 8.6))
    assert math.isfinite(opacity_value.lite(O73, 10 ** (-2.0 + 3 * 8.6 - 18), 10 ** 8.6))


def test_clamp_moves_onto_the_ragged_edge():
    O = kernel(0.0, 0.02, clamp=True)
    # inside the hole at log T = 3.775: clamped to the strip's low end, log R = -6.5
    inside = opacity_value.lite(O, 10 ** (-6.5 + 3 * 3.775 - 18), 10 ** 3.775)
    clamped = opacity_value.lite(O, 10 ** (-7.8 + 3 * 3.775 - 18), 10 ** 3.775)
    assert math.isfinite(clamped) and clamped == pytest.approx(inside, rel=1e-12)


def test_interpolation_between_nodes_agrees_with_scipy_cubic():
    # scipy RegularGridInterpolator(method="cubic") on a hole-free block of table 73:
    # two different cubic interpolants of one table differ by their interpolation
    # error; stated bound 0.01 dex at the cell centres of log T 4.5-6.0, log R -8..-3
    # (measured 3e-3 at most).
    from scipy.interpolate import RegularGridInterpolator
    t73 = tables.read_table(PACKAGED, X=0.7, Z=0.02)
    i = (t73.log_T >= 4.5 - 1e-9) & (t73.log_T <= 6.0 + 1e-9)
    j = t73.log_R <= -3.0 + 1e-9
    ref = RegularGridInterpolator((t73.log_T[i], t73.log_R[j]), t73.log_kappa[np.ix_(i, j)],
                                  method="cubic")
    O = kernel(0.7, 0.02)
    worst = 0.0
    for a in (t73.log_T[i][1:-2] + 0.025):
        for b in (t73.log_R[j][1:-2] + 0.25):
            worst = max(worst, abs(log_kappa_at(O, a, b) - ref([a, b])[0]))
    assert worst < 0.01


def test_composition_interpolation_matches_independent_lagrange(published):
    # X = 0.28, Z = 0.015 (no table): 3-point Lagrange in Z (nodes 0.004, 0.01, 0.02:
    # around 0.015 and the nearer outer one) on the series X = 0.1, 0.2, 0.35, then in
    # X over those three (0.1, 0.2, 0.35), evaluated here with scipy's
    # BarycentricInterpolator on the independently parsed tables.
    from scipy.interpolate import BarycentricInterpolator
    by = {(X, Z): v for X, Z, _, v in published.values()}
    zs = (0.004, 0.01, 0.02)
    at_z = [BarycentricInterpolator(zs, np.stack([by[(x, z)] for z in zs]))(0.015)
            for x in (0.1, 0.2, 0.35)]
    expected = BarycentricInterpolator((0.1, 0.2, 0.35), np.stack(at_z))(0.28)
    got = tables.read_table(PACKAGED, X=0.28, Z=0.015)
    np.testing.assert_allclose(got.log_kappa, expected, rtol=0, atol=1e-12)
    assert np.array_equal(np.isnan(got.log_kappa), np.isnan(expected))
    assert "interpolated to X = 0.28, Z = 0.015" in got.description[0]


def _without_table(n, tmp_path):
    out, k = [], 0
    while k < len(LINES):
        line = LINES[k]
        m = re.match(r"TABLE #\s*(\d+)", line)
        if m and int(m.group(1)) == n:
            if k + 4 < len(LINES) and LINES[k + 4].startswith("logT"):
                k += 77  # the block
            else:
                k += 1  # its line in the table list
            continue
        out.append(line.replace("There are 126 tables", "There are 125 tables"))
        k += 1
    path = tmp_path / f"GN93hz_without_{n}"
    path.write_text("\n".join(out) + "\n", encoding="latin-1")
    return path


def test_left_out_composition_is_reproduced(tmp_path, published):
    # Table 73 (X = 0.7, Z = 0.02) left out: the scheme interpolates in Z from 0.004,
    # 0.01, 0.03 (the file's Z grid is sparse there).  Stated accuracy: 0.08 dex at
    # most and 0.03 dex rms for log T >= 4.5 (measured 0.063 and 0.022).
    got = tables.read_table(_without_table(73, tmp_path), X=0.7, Z=0.02)
    ref = published[73][3]
    sel = got.log_T >= 4.5
    d = (got.log_kappa - ref)[sel]
    assert np.nanmax(np.abs(d)) < 0.08
    assert np.sqrt(np.nanmean(d ** 2)) < 0.03


def test_high_temperature_low_R_tends_to_electron_scattering():
    # common practice: kappa -> kappa_es = sigma_T (1 + X) / (2 m_u) (fully ionized,
    # Thomson; CODATA sigma_T and m_u) within the few per cent of Compton corrections,
    # at log T 6.5-7.0, log R = -8 (at higher T the Compton reduction grows: 7% at 7.5).
    kes = 6.6524587e-25 * 1.7 / (2 * 1.66053907e-24)
    t73 = tables.read_table(PACKAGED, X=0.7, Z=0.02)
    sel = (t73.log_T >= 6.5 - 1e-9) & (t73.log_T <= 7.0 + 1e-9)
    kappa = 10 ** t73.log_kappa[sel, 0]
    assert np.all(np.abs(kappa / kes - 1) < 0.04)
    assert np.all(kappa <= kes)  # Compton scattering lowers the Thomson value


def test_iron_bump_near_log_T_5_25():
    # common practice: the iron (Z) bump of OPAL opacities peaks near log T = 5.2-5.3
    for X, Z in ((0.7, 0.02), (0.0, 0.02)):
        t = tables.read_table(PACKAGED, X=X, Z=Z)
        sel = (t.log_T > 4.9) & (t.log_T < 5.8)
        for j in (4, 6, 8):  # log R = -6, -5, -4
            peak = t.log_T[sel][np.nanargmax(t.log_kappa[sel, j])]
            assert 5.15 <= peak <= 5.35


def test_format_detection_and_naming(tmp_path):
    assert tables.detect_format(PACKAGED) == "opal"
    text = tmp_path / "k.txt"
    text.write_text("-8 -7 -6 -5\n4.0 1 1 1 1\n4.1 1 1 1 1\n4.2 1 1 1 1\n4.3 1 1 1 1\n")
    assert tables.detect_format(text) == "text"
    assert tables.read_table(PACKAGED, format="opal", X=0.7, Z=0.02).shape == (70, 19)
    with pytest.raises(ModelError, match=r"format = \"opl\" is not known; choose one of: "
                                         r"auto, text, hdf5, opal"):
        tables.read_table(PACKAGED, format="opl")
    # an OPAL file read as a text matrix: refused in one line naming the known layouts
    with pytest.raises(ModelError, match="known layouts"):
        tables.read_table(PACKAGED, format="text")


@pytest.mark.parametrize(("X", "Z", "fragment"), [
    # the file's table list: Z <= 0.1 everywhere; at Z = 0.09 only the X <= 0.9 series
    # reach (X = 0.95 stops at Z = 0.04, Y = 0 at Z = 0.08)
    (0.7, 0.15, r"Z = 0.15 lies outside the file's tables, Z = 0.0 .. 0.1"),
    (0.905, 0.09, r"X = 0.905, Z = 0.09 lies outside the file's tables: at Z = 0.09 they "
                  r"span X = 0 .. 0.9"),
])
def test_composition_outside_coverage(X, Z, fragment):
    with pytest.raises(ModelError, match=fragment):
        tables.read_table(PACKAGED, X=X, Z=Z)


def test_mixture_and_single_composition_checks(tmp_path):
    with pytest.raises(ModelError, match=r"for the G&N'93 Solar metal mixture, not "
                                         r"\"AGSS09\""):
        tables.read_table(PACKAGED, X=0.7, Z=0.02, mixture="AGSS09")
    assert tables.read_table(PACKAGED, X=0.7, Z=0.02, mixture="G&N'93 solar").shape
    # a one-composition OPAL file: the header, table 73's list line and its block
    first = next(k for k, line in enumerate(LINES) if line.startswith("TABLE #"))
    listed = next(line for line in LINES[first:] if line.startswith("TABLE # 73"))
    block = next(k for k in range(first + 126, len(LINES))
                 if LINES[k].startswith("TABLE # 73"))
    head = [line.replace("There are 126 tables", "There are 1 tables")
            for line in LINES[:first]]
    one = tmp_path / "one"
    one.write_text("\n".join(head + [listed, ""] + LINES[block:block + 76]) + "\n",
                   encoding="latin-1")
    i = int(np.flatnonzero(np.isclose(tables.read_table(one).log_T, 5.30))[0])
    # within the stated tolerance (|dX| <= 0.01, |dZ| <= 0.1 Z + 1e-4): table 73 itself
    assert tables.read_table(one, X=0.705, Z=0.021).log_kappa[i, 0] == -0.281
    with pytest.raises(ModelError, match=r"holds one composition, X = 0.7, Z = 0.02; the "
                                         r"model's X = 0.5, Z = 0.02 differ"):
        tables.read_table(one, X=0.5, Z=0.02)
