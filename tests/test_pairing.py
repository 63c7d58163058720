"""Model against test: pairing a fitted table with a perturbed analysis model.

Test: a 4-DOF lumped chain (non-proportional damping), struck at DOF 1 by a unit impulse
(``solve_ivp``, tests/reference_models.py), fitted by ``modalnb.fit_modes``; the sensor
on DOF 3 is mounted upside down (direction ``-Z``, its record negated). Model: the same
chain with one spring 8 % stiffer and one mass 5 % heavier, undamped real modes from
``scipy.linalg.eigh(K', M')``, written in the CSV layout of ``modalnb.pairing`` in a
shuffled order. Truth for the pairing: the MAC formula ``|a^H b|^2 / ((a^H a)(b^H b))``
(Allemang & Brown 1982; from memory) evaluated here on the eigenvectors of the true
system (``scipy.linalg.eig`` of the state matrix) and of the model, and the frequency
difference ``100 (f_true - f_model) / f_model``.
"""

from __future__ import annotations

import numpy as np
import pytest
from reference_models import eig_truth, impulse_response
from scipy.linalg import eigh

import modalnb

FS = 1024.0
M4 = np.diag([1.0, 1.2, 0.9, 0.7])
K4 = 3e4 * np.array([[2.0, -1.0, 0, 0], [-1.0, 2.0, -1.0, 0], [0, -1.0, 2.0, -1.0],
                     [0, 0, -1.0, 1.0]])
C4 = 2e-5 * K4 + 0.3 * M4
C4[0, 0] += 1.0
NODES = ["n1", "n2", "n3", "n4"]


@pytest.fixture(scope="module")
def table():
    t = (np.arange(8192) - 64) / FS
    x = impulse_response(M4, C4, K4, t, drive=0)
    x[2] *= -1.0  # sensor on n3 mounted upside down
    noise = 1e-4 * np.abs(x).max() * np.random.default_rng(2).standard_normal(x.shape)
    rec = modalnb.records_from_arrays((x + noise)[None], FS, t0=t[0], channels=["a1", "a2", "a3", "a4"],
                                      node=NODES, direction=["+Z", "+Z", "-Z", "+Z"])
    return modalnb.fit_modes(rec, accept=[True])


def perturbed_model():
    k, m = K4.copy(), M4.copy()
    k[1:3, 1:3] += 0.08 * 3e4 * np.array([[1.0, -1.0], [-1.0, 1.0]])  # spring n2-n3 8 % stiffer
    m[3, 3] *= 1.05
    w2, phi = eigh(k, m)
    return np.sqrt(w2) / (2 * np.pi), phi


def write_model(folder, order):
    f, phi = perturbed_model()
    modes = folder / "model_modes.csv"
    shapes = folder / "model_shapes.csv"
    modes.write_text("mode,frequency_hz\n" + "".join(f"{10 + i},{float(f[i])!r}\n" for i in order))
    rows = ["mode,node,direction,value"]
    for i in order:
        for j, node in enumerate(NODES):
            # n4 written as -Z with the value negated: the same motion
            d, v = ("-Z", -phi[j, i]) if node == "n4" else ("+Z", phi[j, i])
            rows.append(f"{10 + i},{node},{d},{float(v)!r}")
    shapes.write_text("\n".join(rows) + "\n")
    return modes, shapes


def test_pairs_a_perturbed_model_by_mac_and_frequency(table, tmp_path):
    fn, _, psi = eig_truth(M4, C4, K4)
    assert table.sizes["mode"] == 4
    np.testing.assert_allclose(table["frequency_hz"].values, fn, rtol=1e-4)
    order = [2, 0, 3, 1]  # the model's files list the modes shuffled
    pairs = modalnb.pair_modes(table, write_model(tmp_path, order))
    f_model, phi = perturbed_model()
    assert pairs["test_mode"].values.tolist() == [1, 2, 3, 4]
    assert pairs["model_mode"].values.tolist() == [10, 11, 12, 13]  # mode i pairs with model i
    for i in range(4):
        a, b = psi[:, i], phi[:, i]
        expected = abs(np.vdot(a, b)) ** 2 / (np.vdot(a, a).real * np.vdot(b, b).real)
        assert abs(pairs["mac"].values[i] - expected) < 0.005
        np.testing.assert_allclose(pairs["frequency_difference_pct"].values[i],
                                   100 * (fn[i] - f_model[i]) / f_model[i], atol=0.01)
    assert np.all(pairs["same_mode"].values)
    assert sorted(pairs["node_direction"].values.tolist()) == ["n1Z", "n2Z", "n3Z", "n4Z"]
    # the MAC matrix: large on the pairs, small off them (a perturbation, not another chain)
    mm = pairs["mac_matrix"].sel(test=[1, 2, 3, 4], model=[10, 11, 12, 13]).values
    assert np.all(np.diag(mm) > 0.95) and np.all(mm[~np.eye(4, dtype=bool)] < 0.2)
    assert pairs.attrs["unpaired"] == "none"


def test_fewer_model_modes_leave_test_modes_unpaired(table, tmp_path):
    pairs = modalnb.pair_modes(table, write_model(tmp_path, [0, 2]))
    assert pairs["test_mode"].values.tolist() == [1, 3]
    assert pairs["model_mode"].values.tolist() == [10, 12]
    assert "test mode 2" in pairs.attrs["unpaired"] and "test mode 4" in pairs.attrs["unpaired"]


def test_a_model_dataset_works_as_the_csv_files(table, tmp_path):
    files = write_model(tmp_path, [0, 1, 2, 3])
    from modalnb.pairing import read_model_modes

    ds = read_model_modes(*files)
    a = modalnb.pair_modes(table, files)
    b = modalnb.pair_modes(table, ds)
    np.testing.assert_array_equal(a["mac"].values, b["mac"].values)


@pytest.mark.parametrize("modes_text, shapes_text, needle", [
    ("mode,frequency_hz\n1,abc\n", "mode,node,direction,value\n1,n1,Z,1\n", "row 2: frequency_hz 'abc'"),
    ("mode,frequency_hz\n1,5\n1,6\n", "mode,node,direction,value\n1,n1,Z,1\n", "row 3: mode 1 is listed twice"),
    ("mode,freq\n1,5\n", "mode,node,direction,value\n1,n1,Z,1\n", "no column 'frequency_hz'"),
    ("mode,frequency_hz\n1,5\n", "mode,node,direction,value\n1,n1,Z,1\n2,n1,Z,1\n", "row 3: mode 2 is not in"),
    ("mode,frequency_hz\n1,5\n", "mode,node,direction,value\n1,n1,Z,x\n", "row 2: value 'x'"),
    ("mode,frequency_hz\n1,5\n", "mode,node,direction,value\n1,q9,Z,1\n", "share no node-direction"),
])
def test_bad_model_files_give_one_line_errors(table, tmp_path, modes_text, shapes_text, needle):
    (tmp_path / "m.csv").write_text(modes_text)
    (tmp_path / "s.csv").write_text(shapes_text)
    with pytest.raises(modalnb.ModalnbError) as exc:
        modalnb.pair_modes(table, (tmp_path / "m.csv", tmp_path / "s.csv"))
    assert "\n" not in str(exc.value) and needle in str(exc.value)
