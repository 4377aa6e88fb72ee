"""The tabulated opacity law: files, interpolation kernel, converter, CLI.

Tiers (DEVELOPERS.md): (a) exact results -- node values, the analytic law a
table was made from, the interpolation order of a bicubic spline; (d)
invariants -- C1 continuity across cell edges, round trips through both file
formats and the resolved model file; (e) every malformed file gives its
one-line ModelError; (f) kernel and user layer agree, and a wind solved on a
table of a law matches the wind solved on the law itself.
"""

import math
import os
import tomllib

import astropy.units as u
import h5py
import numpy as np
import pytest
from test_isothermal import parker_model

import windsolve
from windsolve import OPACITY_LAWS, Opacity, cli, tables
from windsolve.core import basics
from windsolve.core import opacity as K
from windsolve.errors import ModelError
from windsolve.modelfile import dumps
from windsolve.opacity import opacity_value

X, Z = 0.7, 0.02
KES = basics.electron_scattering_opacity(X, Z)
CONFIGS = os.path.join(os.path.dirname(__file__), os.pardir, "configs")
DEMO_TABLE = os.path.join(CONFIGS, "invented_bump_table.txt")
# The invented law of configs/invented_bump_table.txt (see its header).
BUMP = Opacity("bump", amplitude=5, peak_temperature="1.8e5 K", width_dex=0.15,
               density_exponent=0.3, reference_density="1e-10 g/cm3")


def table_vector(table, clamp=False):
    """O for ``table`` without a file (the converter's own path)."""
    params, extra = tables.table_kernel_data(table, clamp)
    return K.pack(K.LAW_TABLE, KES, params, extra=extra)


def rho_of(log_T, log_R):
    """rho = R (T / 1e6 K)^3 [g/cm3]."""
    return 10.0 ** (log_R + 3.0 * log_T - 18.0)


def bump_table(per_cell=1):
    """The bump law on log T 3.8..6.5, log R -8..-2, 0.1 / 1 dex spacing over ``per_cell``."""
    log_T = tables.grid(3.8, 6.5, 27 * per_cell + 1, "log T")
    log_R = tables.grid(-8.0, -2.0, 6 * per_cell + 1, "log R")
    return tables.tabulate(BUMP, log_T, log_R, X, Z)


def max_log_error(O, O_law, n=3000, seed=7):
    """Largest |log10 kappa_table - log10 kappa_law| at random points inside."""
    rng = np.random.default_rng(seed)
    err = 0.0
    for x, y in zip(rng.uniform(3.8, 6.5, n), rng.uniform(-8.0, -2.0, n), strict=True):
        rho, T = rho_of(x, y), 10.0**x
        err = max(err, abs(math.log10(K.opacity(O, rho, T) / K.opacity(O_law, rho, T))))
    return err


# --- (a) exact results ---------------------------------------------------------

def test_node_values_are_reproduced_exactly():
    # Tier (a): a Hermite cell takes its corner values exactly (H_0(0) = 1,
    # the other basis functions vanish there), so every node returns the
    # tabulated log10 kappa bit for bit; through rho = R T6^3 and back it
    # matches to rounding of the coordinate transform (1e-12 relative).
    table = bump_table()
    O = table_vector(table)
    for i, x in enumerate(table.log_T):
        for j, y in enumerate(table.log_R):
            f, _, _ = K.table_log_opacity(O, x, y)
            assert f == table.log_kappa[i, j]
            kappa = K.opacity(O, rho_of(x, y), 10.0**x)
            assert math.isclose(kappa, 10.0 ** table.log_kappa[i, j], rel_tol=1e-12)


def test_table_reproduces_its_law_at_fourth_order():
    # Tier (a): the table holds the bump law at its nodes; between them the
    # tensor-product cubic spline has error O(h^4) (de Boor 2001, ch. XVII),
    # so halving the spacing divides the error by ~16 (order 4).  Measured
    # here: 4.3e-4, 1.7e-5, 7.6e-7 dex for log T spacings 0.05, 0.025,
    # 0.0125 (orders 4.7 and 4.4; 4.0-4.8 over other random samples, the
    # max norm being a sampled one).  The lower bound fails for a
    # third-order scheme (ratio 8, e.g. finite-difference node slopes).
    O_law = BUMP.kernel_vector(X, Z)
    errors = [max_log_error(table_vector(bump_table(n)), O_law) for n in (2, 4, 8)]
    orders = [math.log2(errors[k] / errors[k + 1]) for k in range(2)]
    assert all(3.6 < p < 5.5 for p in orders), (errors, orders)
    assert errors[-1] < 3e-6, errors
    # The coarse demo spacing (0.05 dex, three nodes per bump width) is
    # good to ~4e-4 dex (0.1 per cent in kappa).
    assert errors[0] < 1e-3, errors


def test_constant_law_is_interpolated_exactly():
    # Tier (a): the spline of constant data is that constant; the Hermite
    # basis sums to one, so only rounding remains.
    table = tables.tabulate(Opacity("electron_scattering"), tables.grid(3.5, 7, 8, "T"),
                            tables.grid(-10, 0, 6, "R"), X, Z)
    O = table_vector(table)
    rng = np.random.default_rng(3)
    for x, y in zip(rng.uniform(3.5, 7, 200), rng.uniform(-10, 0, 200), strict=True):
        assert math.isclose(K.opacity(O, rho_of(x, y), 10.0**x), KES, rel_tol=1e-14)


def test_uniform_and_non_uniform_grids_find_the_same_cells():
    # Tier (f): a uniform axis finds its cell by division (slots 13, 14),
    # any other by bisection; forcing bisection must not change a bit.  A
    # non-uniform table (the spacing of published tables changes with T)
    # still reproduces its nodes exactly and its law to the interpolation error.
    table = bump_table()
    O = table_vector(table)
    assert O[K.SLOT_INV_HT] == pytest.approx(10.0) and O[K.SLOT_INV_HR] == pytest.approx(1.0)
    O_bisect = O.copy()
    O_bisect[K.SLOT_INV_HT] = O_bisect[K.SLOT_INV_HR] = 0.0
    rng = np.random.default_rng(5)
    points = list(zip(rng.uniform(3.8, 6.5, 500), rng.uniform(-8, -2, 500), strict=True))
    points += [(x, y) for x in table.log_T for y in table.log_R[::3]]
    for x, y in points:
        assert K.table_log_opacity_value(O, x, y) == K.table_log_opacity_value(O_bisect, x, y)
    log_T = np.concatenate([np.arange(3.8, 5.0, 0.025), np.arange(5.0, 6.5001, 0.05)])
    uneven = tables.tabulate(BUMP, log_T, np.array([-8, -7, -6.5, -5, -4, -3.5, -2.0]), X, Z)
    O_uneven = table_vector(uneven)
    assert O_uneven[K.SLOT_INV_HT] == 0.0 and O_uneven[K.SLOT_INV_HR] == 0.0
    for i, x in enumerate(uneven.log_T):
        for j, y in enumerate(uneven.log_R):
            assert K.table_log_opacity_value(O_uneven, x, y) == uneven.log_kappa[i, j]
    assert max_log_error(O_uneven, BUMP.kernel_vector(X, Z), n=500) < 2e-3


def test_value_kernel_agrees_with_the_gradient_kernel():
    # Tier (f): the hot-path value kernel and the value-and-gradient kernel
    # are two codings of one interpolant.
    O = table_vector(bump_table())
    rng = np.random.default_rng(9)
    for x, y in zip(rng.uniform(3.8, 6.5, 300), rng.uniform(-8, -2, 300), strict=True):
        assert math.isclose(K.table_log_opacity_value(O, x, y), K.table_log_opacity(O, x, y)[0],
                            rel_tol=1e-13, abs_tol=1e-14)


# --- (d) smoothness ---------------------------------------------------------------

def _edge_jumps(O, axis, edges, others, eps):
    """Largest jump of value and gradient across ``edges`` (value +-eps)."""
    jump_f = jump_g = 0.0
    for e in edges:
        for o in others:
            if axis == 0:
                lo, hi = K.table_log_opacity(O, e - eps, o), K.table_log_opacity(O, e + eps, o)
            else:
                lo, hi = K.table_log_opacity(O, o, e - eps), K.table_log_opacity(O, o, e + eps)
            jump_f = max(jump_f, abs(hi[0] - lo[0]))
            jump_g = max(jump_g, abs(hi[1] - lo[1]), abs(hi[2] - lo[2]))
    return jump_f, jump_g


@pytest.mark.parametrize("axis", [0, 1], ids=["log_T edges", "log_R edges"])
def test_value_and_gradient_are_continuous_across_cell_edges(axis):
    # Tier (d): C1.  Evaluated eps either side of every interior edge, value
    # and both first derivatives must agree up to O(eps) (the next
    # derivative times 2 eps): a jump that does not shrink with eps would be
    # a discontinuity.  The gradient kernel is also checked against central
    # differences of the value (tier f).
    table = bump_table()
    O = table_vector(table)
    grid = table.log_T if axis == 0 else table.log_R
    other = table.log_R if axis == 0 else table.log_T
    rng = np.random.default_rng(11)
    others = rng.uniform(other[0], other[-1], 7)
    edges = grid[1:-1]
    f1, g1 = _edge_jumps(O, axis, edges, others, 1e-6)
    f2, g2 = _edge_jumps(O, axis, edges, others, 1e-8)
    assert f2 < 1e-6 and g2 < 1e-4, (f2, g2)  # ~2 eps |grad| and 2 eps |hessian|
    assert f2 < 0.05 * f1 and g2 < 0.05 * g1  # both shrink ~100x with eps
    h = 1e-6
    for x, y in zip(rng.uniform(3.9, 6.4, 50), rng.uniform(-7.9, -2.1, 50), strict=True):
        f, fx, fy = K.table_log_opacity(O, x, y)
        dfx = (K.table_log_opacity(O, x + h, y)[0] - K.table_log_opacity(O, x - h, y)[0]) / (2 * h)
        dfy = (K.table_log_opacity(O, x, y + h)[0] - K.table_log_opacity(O, x, y - h)[0]) / (2 * h)
        assert abs(fx - dfx) < 1e-6 * (1 + abs(fx)) and abs(fy - dfy) < 1e-6 * (1 + abs(fy))


# --- off the table ------------------------------------------------------------------

OUTSIDE = [(3.7, -5.0), (6.6, -5.0), (5.0, -8.1), (5.0, -1.9), (3.0, -9.0)]


@pytest.mark.parametrize("log_T, log_R", OUTSIDE)
def test_off_table_gives_nan_and_the_flag(log_T, log_R):
    # Tier (d): outside the table the law has no value: NaN, off_table True,
    # a negative margin (docs/physics.md, section 2: stop, do not extrapolate).
    O = table_vector(bump_table())
    rho, T = rho_of(log_T, log_R), 10.0**log_T
    assert math.isnan(K.opacity(O, rho, T))
    assert math.isnan(K.effective_opacity(O, rho, T, 1e12))
    assert K.off_table(O, rho, T)
    assert K.table_margin(O, rho, T) < 0.0


def test_inside_the_table_and_analytic_laws_are_not_off_table():
    O = table_vector(bump_table())
    rho, T = rho_of(5.0, -5.0), 1e5
    assert not K.off_table(O, rho, T)
    assert math.isclose(K.table_margin(O, rho, T), 1.2, rel_tol=1e-12)  # 6.5 - 5.0 vs 5 - 3.8
    # corners count as inside, even after the rho = R T6^3 round trip
    for x in (3.8, 6.5):
        for y in (-8.0, -2.0):
            assert not K.off_table(O, rho_of(x, y), 10.0**x)
            assert np.isfinite(K.opacity(O, rho_of(x, y), 10.0**x))
    # NaN input is not "off the table" (its NaN comes from elsewhere)
    assert not K.off_table(O, math.nan, 1e5)
    for law in ("electron_scattering", "kramers"):
        O_law = Opacity(law).kernel_vector(X, Z)
        assert not K.off_table(O_law, 1e-30, 1e9)
        assert K.table_margin(O_law, 1e-30, 1e9) == math.inf


@pytest.mark.parametrize("log_T, log_R", OUTSIDE)
def test_clamp_gives_the_edge_value(log_T, log_R):
    # Tier (a): with clamp = true each coordinate moves onto the nearest
    # edge; the value there is exactly the table's edge value.
    table = bump_table()
    O = table_vector(table, clamp=True)
    x = min(max(log_T, 3.8), 6.5)
    y = min(max(log_R, -8.0), -2.0)
    edge = 10.0 ** K.table_log_opacity(O, x, y)[0]
    # (the kernel takes 10^f as exp(f ln 10): equal to the last bit or two)
    assert math.isclose(K.opacity(O, rho_of(log_T, log_R), 10.0**log_T), edge, rel_tol=1e-14)
    assert not K.off_table(O, rho_of(log_T, log_R), 10.0**log_T)
    assert K.table_margin(O, rho_of(log_T, log_R), 10.0**log_T) == math.inf


# --- O vector and registry ----------------------------------------------------------

def test_kernel_vector_layout_and_user_layer_agree(tmp_path):
    # Tier (f): Opacity("table").kernel_vector reads the file into the slot
    # layout of core.opacity, and opacity_value (API) equals the kernel.
    table = bump_table()
    path = tables.write_table(table, tmp_path / "bump.txt")
    op = Opacity("table", path=str(path))
    O = op.kernel_vector(X, Z)
    nT, nR = table.shape
    assert O.shape == (K.N_SLOTS + 4 + nT + nR + 4 * nT * nR + 2 * (nT - 1),)
    assert O[K.SLOT_LAW] == K.LAW_TABLE
    assert (O[K.SLOT_LOGT_MIN], O[K.SLOT_LOGT_MAX]) == (3.8, 6.5)
    assert (O[K.SLOT_LOGR_MIN], O[K.SLOT_LOGR_MAX], O[K.SLOT_CLAMP]) == (-8.0, -2.0, 0.0)
    assert (O[K.SLOT_NT], O[K.SLOT_NR]) == (nT, nR)
    np.testing.assert_array_equal(O[K.SLOT_GRID:K.SLOT_GRID + nT], table.log_T)
    np.testing.assert_array_equal(O, table_vector(table))
    assert Opacity("table", path=str(path), clamp=True).kernel_vector(X, Z)[K.SLOT_CLAMP] == 1.0
    value = opacity_value(op, "1e-9 g/cm3", "1.8e5 K", X, Z).value
    assert value == K.opacity(O, 1e-9, 1.8e5)
    # porosity slots keep their meaning for a table
    O_p = op.kernel_vector(X, Z, porosity=(1e10, 1e12, 1.0))
    assert (O_p[K.SLOT_H0], O_p[K.SLOT_R0], O_p[K.SLOT_Q]) == (1e10, 1e12, 1.0)


def test_registry_entry():
    law = OPACITY_LAWS["table"]
    assert law.code == K.LAW_TABLE
    assert [p.name for p in law.parameters] == ["path", "clamp", "format", "mixture"]
    assert [p.default for p in law.parameters] == [None, False, "auto", ""]


@pytest.mark.parametrize("kwargs, fragment", [
    (dict(), "path is required by the table law"),
    (dict(path=3), "write the file's path as a quoted string"),
    (dict(path="  "), "quoted string"),
    (dict(path="t.txt", clamp="yes"), "write true or false"),
    (dict(path="t.txt", clip=True), 'did you mean "clamp"'),
])
def test_bad_table_settings(kwargs, fragment):
    # Tier (e)
    with pytest.raises(ModelError, match=fragment):
        Opacity("table", kwargs)


def test_parsed_table_is_cached_per_file_version(tmp_path):
    # Sweeps build many models on one table: read and differentiate it once,
    # but read again when the file changes (path + mtime + size).
    path = tables.write_table(bump_table(), tmp_path / "t.txt")
    first = tables.load_table(path)
    assert tables.load_table(str(path)) is first
    tables.write_table(tables.tabulate(Opacity("kramers"), bump_table().log_T,
                                       bump_table().log_R, X, Z), path)
    st = path.stat()
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns + 10**9))
    second = tables.load_table(path)
    assert second is not first
    assert not np.array_equal(second[0].log_kappa, first[0].log_kappa)


# --- (d) round trips ------------------------------------------------------------------

@pytest.mark.parametrize("name", ["t.txt", "t.h5"])
def test_round_trip_through_the_file(tmp_path, name):
    # Tier (d): text is written with the shortest exact repr and HDF5 as
    # float64, so both give back the same numbers bit for bit.
    table = bump_table()
    path = tables.write_table(table, tmp_path / name)
    back = tables.read_table(path)
    for field in ("log_T", "log_R", "log_kappa"):
        np.testing.assert_array_equal(getattr(back, field), getattr(table, field))
    assert back.description == table.description
    assert not list(tmp_path.glob(".*tmp*"))  # the temporary name is gone
    if name.endswith(".h5"):
        with h5py.File(path) as f:
            assert f.attrs["format"] == tables.HDF5_FORMAT
            assert {k: f[k].attrs["units"] for k in tables.HDF5_UNITS} == tables.HDF5_UNITS


def test_writing_into_a_missing_directory_is_a_one_line_error(tmp_path):
    # Tier (e)
    with pytest.raises(windsolve.OutputError, match=r"t.h5: cannot write \(") as info:
        tables.write_table(bump_table(), tmp_path / "no" / "t.h5")
    assert "\n" not in str(info.value)
    with pytest.raises(windsolve.OutputError, match="cannot write"):
        tables.write_table(bump_table(), tmp_path / "no" / "t.txt")


def test_resolved_model_file_round_trips_path_and_clamp(tmp_path):
    # Tier (d): a model file with a relative table path resolves it against
    # the model file; the resolved TOML holds the absolute path and the flag
    # and builds the same model again.
    (tmp_path / "tabs").mkdir()
    tables.write_table(bump_table(), tmp_path / "tabs" / "k.txt")
    text = (tmp_path / "m.toml")
    model, _, _ = parker_model(0.5)
    data = model.to_dict()
    data["opacity"] = {"law": "table", "path": "tabs/k.txt", "clamp": True}
    text.write_text(dumps(data))
    loaded = windsolve.load_model(text)
    resolved = loaded.opacity.to_toml()
    assert resolved == {"law": "table", "path": str(tmp_path / "tabs" / "k.txt"),
                        "clamp": True, "format": "auto", "mixture": ""}
    again = windsolve.model_from_dict(tomllib.loads(dumps(loaded.to_dict())))
    assert again.opacity == loaded.opacity
    np.testing.assert_array_equal(again.kernel_arrays[1], loaded.kernel_arrays[1])


# --- (e) malformed files ----------------------------------------------------------------

GOOD_R = "-8 -7 -6 -5"
GOOD_ROWS = ["4.0 -0.5 -0.4 -0.3 -0.2", "4.5 -0.4 -0.3 -0.2 -0.1",
             "5.0 -0.3 -0.2 -0.1 0.0", "5.5 -0.2 -0.1 0.0 0.1"]


def _text(r=GOOD_R, rows=GOOD_ROWS, head="# invented test table\n"):
    return head + r + "\n" + "\n".join(rows) + "\n"


BAD_TEXT = [
    ("ragged row", _text(rows=GOOD_ROWS[:2] + ["5.0 -0.3 -0.2 -0.1"] + GOOD_ROWS[3:]),
     r"row 3 \(line 5\) has 4 values, expected 5"),
    ("log T decreasing", _text(rows=[GOOD_ROWS[1], GOOD_ROWS[0]] + GOOD_ROWS[2:]),
     r"log10 T must increase strictly, but 4.0 at line 4 follows 4.5"),
    ("log T repeated", _text(rows=GOOD_ROWS[:2] + [GOOD_ROWS[1]] + GOOD_ROWS[3:]),
     r"log10 T must increase strictly, but 4.5 at line 5 follows 4.5"),
    ("log R decreasing", _text(r="-8 -6 -7 -5"),
     r"log10 R must increase strictly, but -7.0 at line 2, column 3 follows -6.0"),
    ("NaN kappa", _text(rows=GOOD_ROWS[:1] + ["4.5 -0.4 nan -0.2 -0.1"] + GOOD_ROWS[2:]),
     r"log10 kappa is nan at line 4, column 3 \(log10 T = 4.5, log10 R = -7.0\)"),
    ("inf log R", _text(r="-8 -7 -6 inf"), r"log10 R is inf at line 2, column 4"),
    ("three log R", _text(r="-8 -7 -6", rows=[r[: r.rfind(" ")] for r in GOOD_ROWS]),
     r"only 3 log10 R values; the interpolation needs at least 4"),
    ("three log T", _text(rows=GOOD_ROWS[:3]), r"only 3 log10 T values"),
    ("TOML file", 'model = "isothermal"\n[star]\nmass = "50 Msun"\n',
     r"not an opacity table: line 1 \(\"model = \"isothermal\"\"\) should hold the log10 R"),
    ("comments only", "# nothing here\n\n# at all\n", r"not an opacity table: it holds no numbers"),
    ("empty", "", r"not an opacity table: it holds no numbers"),
    ("one row", "1 2 3 4 5\n", r"not an opacity table: only one row of numbers"),
    ("placeholder layout", _text(r="0 " + GOOD_R, rows=GOOD_ROWS),
     r"the first row has as many values \(5\) as the table rows; write the log10 R row "
     r"without a placeholder"),
    ("word in a row", _text(rows=GOOD_ROWS[:1] + ["4.5 -0.4 x -0.2 -0.1"] + GOOD_ROWS[2:]),
     r"line 4: \"x\" is not a number"),
    ("linear T", _text(rows=["1e4" + r[3:] for r in GOOD_ROWS[:1]] + GOOD_ROWS[1:]),
     r"log10 T must increase strictly"),
    ("linear T increasing", _text(rows=[f"{10**(4 + k / 2):.0f}" + r[3:]
                                        for k, r in enumerate(GOOD_ROWS)]),
     r"log10 T = 10000.0 at line 3 is not a log10 temperature"),
]


@pytest.mark.parametrize("name, content, fragment", BAD_TEXT, ids=[c[0] for c in BAD_TEXT])
def test_bad_text_table(tmp_path, name, content, fragment):
    # Tier (e): one line naming the file, the place and the problem; through
    # the opacity law the file is named as the model file's setting.
    path = tmp_path / "bad.txt"
    path.write_text(content)
    with pytest.raises(ModelError, match=fragment) as info:
        tables.read_table(path)
    message = str(info.value)
    assert "\n" not in message and message.startswith(f"{path}: ")
    with pytest.raises(ModelError, match=fragment) as info:
        Opacity("table", path=str(path)).kernel_vector(X, Z)
    assert str(info.value).startswith(f'[opacity] path = "{path}": ')


def test_good_text_table_with_comments_anywhere(tmp_path):
    # The fixture table itself reads; comments may sit between rows and after
    # values, commas count as blanks.
    rows = [GOOD_ROWS[0], "# a comment between rows", GOOD_ROWS[1] + "  # trailing",
            GOOD_ROWS[2].replace(" ", ", "), "", GOOD_ROWS[3]]
    path = tmp_path / "ok.txt"
    path.write_text(_text(rows=rows))
    table = tables.read_table(path)
    assert table.shape == (4, 4) and table.description == ("invented test table",)
    assert table.log_kappa[2, 3] == 0.0


def test_missing_and_binary_files(tmp_path):
    # Tier (e)
    missing = tmp_path / "nope.txt"
    with pytest.raises(ModelError, match=rf"^\[opacity\] path = \"{missing}\": no such file$"):
        Opacity("table", path=str(missing)).kernel_vector(X, Z)
    with pytest.raises(ModelError, match="no such file"):
        tables.read_table(missing)
    with pytest.raises(ModelError, match="is a directory"):
        tables.read_table(tmp_path)
    junk = tmp_path / "junk.bin"
    junk.write_bytes(bytes(range(256)) * 4)
    with pytest.raises(ModelError, match=r"not an opacity table in a known layout \(known "):
        tables.read_table(junk)


def _h5(path, **datasets):
    with h5py.File(path, "w") as f:
        for name, value in datasets.items():
            if isinstance(value, dict):
                f.create_group(name)
                continue
            d = f.create_dataset(name, data=value)
            if name in tables.HDF5_UNITS:
                d.attrs["units"] = tables.HDF5_UNITS[name]
    return path


LT = np.array([4.0, 4.5, 5.0, 5.5])
LR = np.array([-8.0, -7.0, -6.0, -5.0])
LK = np.zeros((4, 4))
BAD_H5 = [
    ("result file", dict(summary={}, profile={}),
     r"not an opacity table: an HDF5 file without log_T, log_R, log_kappa \(it holds "
     r"profile, summary\)"),
    ("no kappa", dict(log_T=LT, log_R=LR), r"without log_kappa"),
    ("shape", dict(log_T=LT, log_R=LR, log_kappa=np.zeros((4, 5))),
     r"dataset log_kappa has shape \(4, 5\), expected \(4, 4\)"),
    ("2-D axis", dict(log_T=LT.reshape(2, 2), log_R=LR, log_kappa=LK),
     r"dataset log_T has shape \(2, 2\)"),
    ("text data", dict(log_T=np.array([b"a", b"b", b"c", b"d"]), log_R=LR, log_kappa=LK),
     r"dataset log_T is not numeric"),
    ("NaN", dict(log_T=LT, log_R=LR, log_kappa=np.where(np.eye(4) > 0, np.nan, 0.0)),
     r"log10 kappa is nan at log_kappa\[0, 0\]"),
    ("decreasing", dict(log_T=LT[::-1], log_R=LR, log_kappa=LK),
     r"log10 T must increase strictly, but 5.0 at log_T\[1\] follows 5.5"),
    ("too few", dict(log_T=LT, log_R=LR[:3], log_kappa=LK[:, :3]), r"only 3 log10 R values"),
]


@pytest.mark.parametrize("name, datasets, fragment", BAD_H5, ids=[c[0] for c in BAD_H5])
def test_bad_hdf5_table(tmp_path, name, datasets, fragment):
    # Tier (e)
    path = _h5(tmp_path / "bad.h5", **datasets)
    with pytest.raises(ModelError, match=fragment) as info:
        tables.read_table(path)
    assert "\n" not in str(info.value) and str(info.value).startswith(f"{path}: ")


def test_hdf5_units_are_checked_when_given(tmp_path):
    # Tier (e): a table in ln kappa (say) must not pass for log10 kappa.
    path = _h5(tmp_path / "u.h5", log_T=LT, log_R=LR, log_kappa=LK)
    with h5py.File(path, "a") as f:
        f["log_kappa"].attrs["units"] = "ln(cm2 g-1)"
    with pytest.raises(ModelError, match=r'log_kappa has units "ln\(cm2 g-1\)", expected'):
        tables.read_table(path)
    with h5py.File(path, "a") as f:  # no units attribute at all: accepted
        for name in tables.HDF5_UNITS:
            del f[name].attrs["units"]
    assert tables.read_table(path).shape == (4, 4)


# --- converter, CLI, demo table ----------------------------------------------------------

def test_the_invented_demo_table_is_what_the_converter_makes():
    # Provenance check (tier c, internal): configs/invented_bump_table.txt is
    # the bump law of its header, tabulated by tables.tabulate on its grid;
    # 1e-12 dex allows for libm differences between machines.
    assert os.path.getsize(DEMO_TABLE) < 100_000
    table = tables.read_table(DEMO_TABLE)
    assert "INVENTED" in table.description[0]
    assert table.shape == (55, 13)
    again = tables.tabulate(BUMP, table.log_T, table.log_R, X=0.7, Z=0.02)
    np.testing.assert_allclose(table.log_kappa, again.log_kappa, rtol=0, atol=1e-12)


def test_tabulate_rejects_tables_and_bad_grids(tmp_path):
    path = tables.write_table(bump_table(), tmp_path / "t.txt")
    with pytest.raises(ModelError, match="that is a table already"):
        tables.tabulate(Opacity("table", path=str(path)), [4, 5, 6, 7], [-8, -7, -6, -5])
    with pytest.raises(ModelError, match="only 2 log10 T values"):
        tables.tabulate(BUMP, [4, 5], [-8, -7, -6, -5])
    with pytest.raises(ModelError, match="log10 R must increase strictly"):
        tables.tabulate(BUMP, [4, 5, 6, 7], [-8, -7, -7, -5])


def _demo_with(tmp_path, opacity_lines):
    text = str(windsolve.demo_model_path().read_text())
    start = text.index("[opacity]")
    end = text.index("[", start + 1)
    path = tmp_path / "model.toml"
    path.write_text(text[:start] + "[opacity]\n" + opacity_lines + "\n\n" + text[end:])
    return path


@pytest.mark.parametrize("suffix", [".txt", ".h5"])
def test_cli_tabulate_writes_the_converter_table(tmp_path, capsys, suffix):
    # Tier (f): the command line writes what tables.tabulate makes from the
    # model's law and composition, on the asked grid.
    model_path = _demo_with(tmp_path, 'law = "kramers"')
    out = tmp_path / f"k{suffix}"
    code = cli.main(["tabulate", str(model_path), "-o", str(out),
                     "--log-t", "4", "6", "21", "--log-r", "-9", "-3", "7"])
    assert code == 0, capsys.readouterr().err
    table = tables.read_table(out)
    expected = tables.tabulate(Opacity("kramers"), np.linspace(4, 6, 21),
                               np.linspace(-9, -3, 7), X, Z)
    np.testing.assert_array_equal(table.log_T, expected.log_T)
    np.testing.assert_allclose(table.log_kappa, expected.log_kappa, rtol=0, atol=1e-15)
    assert "windsolve tabulate" in table.description[0]


@pytest.mark.parametrize("args, fragment", [
    (["--log-t", "4", "6", "3"], "--log-t: NUM = 3; the interpolation needs at least 4"),
    (["--log-r", "-3", "-9", "7"], "--log-r: START must be below STOP"),
    (["--log-r", "-9", "-3", "7.5"], "NUM must be a whole number"),
    (["--log-t", "four", "6", "7"], "START and STOP must be numbers"),
])
def test_cli_tabulate_bad_grid(tmp_path, capsys, args, fragment):
    # Tier (e): exit 2, one line, nothing written.
    model_path = _demo_with(tmp_path, 'law = "kramers"')
    out = tmp_path / "k.txt"
    assert cli.main(["tabulate", str(model_path), "-o", str(out), *args]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and fragment in err
    assert not out.exists()


def test_cli_tabulate_refuses_a_table_law_and_a_missing_directory(tmp_path, capsys):
    table = tables.write_table(bump_table(), tmp_path / "t.txt")
    model_path = _demo_with(tmp_path, f'law = "table"\npath = "{table}"')
    out = tmp_path / "again.txt"
    assert cli.main(["tabulate", str(model_path), "-o", str(out)]) == 2
    assert "that is a table already" in capsys.readouterr().err
    assert not out.exists()
    model_path = _demo_with(tmp_path, 'law = "bump"\namplitude = 1\n'
                                      'peak_temperature = "2e5 K"\nwidth_dex = 0.1')
    assert cli.main(["tabulate", str(model_path), "-o", str(tmp_path / "no" / "t.h5")]) == 2
    assert "does not exist" in capsys.readouterr().err


# --- (f) a wind on a table ------------------------------------------------------------------

def test_parker_wind_on_an_electron_scattering_table(tmp_path):
    # Tier (f), against tier (a): the Parker-like model of test_isothermal
    # (Gamma = 0.5, exact solution known) solved with a table of the
    # electron-scattering law, which the spline reproduces to rounding, gives
    # the analytic law's mass-loss rate to well within the 1e-6 that
    # the solver's own tolerance (rtol 1e-8, Mdot xtol 1e-9) justifies.  The
    # table spans the whole flow (log R -30..-5; the flow covers -18.6..-11.6).
    model, rc, a = parker_model(0.5)
    table = tables.tabulate(Opacity("electron_scattering"), tables.grid(5.0, 6.5, 7, "log T"),
                            tables.grid(-30.0, -5.0, 11, "log R"), X=0.7, Z=0.0)
    path = tables.write_table(table, tmp_path / "es.h5")
    on_table = windsolve.IsothermalWind(**{**_fields(model),
                                           "opacity": {"law": "table", "path": str(path)}})
    expected = windsolve.solve(model)
    result = windsolve.solve(on_table)
    assert result.converged, result.message
    mdot = result.summary["mass_loss_rate"].to_value(u.g / u.s)
    assert math.isclose(mdot, expected.summary["mass_loss_rate"].to_value(u.g / u.s),
                        rel_tol=1e-6)
    assert math.isclose(result.summary["sonic_radius"].to_value(u.cm), rc, rel_tol=1e-8)


def test_porous_demo_wind_on_an_electron_scattering_table(tmp_path):
    # Tier (f): porosity acts on top of a tabulated law exactly as on the
    # analytic one (the demo star: porous, super-Eddington in kappa_es).
    model = windsolve.load_model(windsolve.demo_model_path())
    table = tables.tabulate(Opacity("electron_scattering"), tables.grid(4.0, 5.0, 5, "log T"),
                            tables.grid(-25.0, 0.0, 6, "log R"), X=0.7, Z=0.02)
    path = tables.write_table(table, tmp_path / "es.txt")
    on_table = model.replace(opacity={"law": "table", "path": str(path)})
    expected = windsolve.solve(model).summary["mass_loss_rate"].to_value(u.g / u.s)
    result = windsolve.solve(on_table)
    assert result.converged, result.message
    assert math.isclose(result.summary["mass_loss_rate"].to_value(u.g / u.s), expected,
                        rel_tol=1e-6)


def _fields(model):
    import dataclasses
    return {f.name: getattr(model, f.name) for f in dataclasses.fields(model)}
