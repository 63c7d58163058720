"""Test campaigns (issue 11): tracked modes against the eigen-solution, pairing, verdicts,
bad sets among good ones, manifest errors.

Outside truth: ``scipy.linalg.eig`` of the state matrix ``[[0, I], [-M^-1 K, -M^-1 C]]``
of each generated part, computed here from the part's matrices (natural frequency
``|lambda| / 2 pi``; any vibration text, e.g. Tisseur & Meerbergen 2001, SIAM Review
43(2), from memory). The records themselves are the modal superposition of
:mod:`modalnb.testing.scenarios`, checked there against ``scipy.integrate.solve_ivp``.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import scipy.linalg

from modalnb import fit_campaign
from modalnb.campaign import ManifestError, pair_modes, read_manifest
from modalnb.demo import bracket_model, lumped_model, lumped_records, production_campaign
from modalnb.io import save_records

N_SAMPLES = 1024  # 0.5 s at 2048 Hz: small sets, quick tests


def eig_frequencies(M: np.ndarray, C: np.ndarray, K: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Natural frequencies (ascending) and displacement shapes from scipy.linalg.eig (the truth)."""
    n = M.shape[0]
    mi = np.linalg.inv(M)
    A = np.block([[np.zeros((n, n)), np.eye(n)], [-mi @ K, -mi @ C]])
    lam, vr = scipy.linalg.eig(A)
    keep = lam.imag > 0
    lam, vr = lam[keep], vr[:n, keep]
    order = np.argsort(np.abs(lam))
    return np.abs(lam[order]) / (2 * np.pi), vr[:, order]


def part_truth(seed: int, part: int, cracked: bool) -> np.ndarray:
    """The eig truth of one generated bracket, rebuilt from its matrices."""
    scatter = np.random.default_rng([seed, part]).uniform(0.99, 1.01, 6)
    mdl = bracket_model(scatter, cracked=cracked)
    return eig_frequencies(mdl.M, mdl.C, mdl.K)[0]


@pytest.fixture(scope="module")
def brackets(tmp_path_factory):
    d = tmp_path_factory.mktemp("brackets")
    manifest = production_campaign(d, n_parts=4, cracked=[3], seed=7, n_samples=N_SAMPLES)
    return manifest


def test_tracked_frequencies_match_eig_truth_and_crack_is_flagged(brackets, tmp_path):
    ds = fit_campaign(brackets, workers=0, tolerance=3.0, out=tmp_path / "out")
    assert list(ds["set_status"].values) == ["ok"] * 4
    assert ds.sizes["mode"] == 3
    for i, part in enumerate(range(1, 5)):
        f_true = part_truth(7, part, cracked=(part == 3))
        f = ds["frequency_hz"].values[i]
        std = ds["frequency_hz_std"].values[i]
        # within 5 standard deviations (or 0.05 %) of scipy.linalg.eig's natural frequencies
        np.testing.assert_array_less(np.abs(f - f_true), np.maximum(5 * std, 5e-4 * f_true))
    # the reference is the first set (P001); the crack lowers mode 1 by ~10 % (eig truth)
    ref_true = part_truth(7, 1, False)
    crack_change = 100 * (part_truth(7, 3, True) - ref_true) / ref_true
    np.testing.assert_allclose(ds["frequency_change_pct"].values[2], crack_change, atol=0.1)
    assert crack_change[0] < -8
    verdict = [str(v) for v in ds["verdict"].values]
    assert verdict[0] == verdict[1] == verdict[3] == "pass"
    assert verdict[2].startswith("fail: mode 1 -1") and "mode 2 -5" in verdict[2]
    assert ds["mode_status"].values[2, 0] == "out of tolerance"
    # MAC of a part with itself and of identical-design parts: near 1
    assert float(np.nanmin(ds["mac_to_reference"].values)) > 0.99
    # the files
    out = tmp_path / "out"
    head = (out / "tracked_modes.csv").read_text().splitlines()[0]
    assert head == ("set,mode,frequency_hz,damping_ratio,frequency_hz_std,damping_ratio_std,"
                    "mac_to_reference,frequency_change_pct,status")
    sets_head = (out / "sets.csv").read_text().splitlines()[0]
    assert sets_head == "set,records,status,verdict,n_modes,extra_modes,part_number,serial,shift"
    for name in ("campaign.nc", "campaign_recipe.json", "campaign.html", "sets/P003/modes.nc",
                 "sets/P003/recipe.json", "sets/P003/campaign_set.json"):
        assert (out / name).is_file(), name
    recipe = json.loads((out / "campaign_recipe.json").read_text())
    assert recipe["tolerance_pct"] == {"1": 3.0, "2": 3.0, "3": 3.0}
    html = (out / "campaign.html").read_text()
    assert "not a certification" in html and "P003" in html
    assert len(html) > 1_000_000 and "src=\"http" not in html  # plotly.js embedded: opens offline


def test_reference_table_and_missing_mode_verdict(brackets, tmp_path):
    """A reference written by `modalnb fit` (its folder); a recipe whose band holds only two
    of the reference's three modes: mode 3 is reported missing, never paired elsewhere."""
    ref_dir = tmp_path / "ref"
    r = subprocess.run([sys.executable, "-m", "modalnb.cli", "fit",
                        str(Path(brackets).parent / "parts" / "P001.nc"), "--out", str(ref_dir), "--quiet"],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    from modalnb import Recipe

    ds = fit_campaign(brackets, workers=0, reference=ref_dir, tolerance={1: 3.0, 3: 3.0},
                      recipe=Recipe(band=(5.0, 650.0)))
    assert "modes.nc" in ds.attrs["reference"]
    assert list(ds["mode"].values) == [1, 2, 3]
    assert ds["verdict"].values[0] == "fail: mode 3 missing"
    assert ds["verdict"].values[2] == f"fail: mode 1 {ds['frequency_change_pct'].values[2, 0]:+.1f} %, mode 3 missing"
    assert (ds["mode_status"].values[:, 2] == "missing").all()
    assert np.isnan(ds["frequency_hz"].values[:, 2]).all()


def _two_oscillators(f1: float, f2: float) -> tuple[np.ndarray, np.ndarray]:
    """Two 1 kg masses, each on its own spring to the ground, tied by a weak spring."""
    w1, w2 = (2 * np.pi * f1) ** 2, (2 * np.pi * f2) ** 2
    kc = 0.01 * min(w1, w2)
    K = np.array([[w1 + kc, -kc], [-kc, w2 + kc]])
    return np.eye(2), K


def test_pairing_across_a_frequency_crossing_keeps_identity_by_mac(tmp_path):
    """Set B: the mode living on mass 1 rose above the one on mass 2. MAC keeps each mode's
    identity; frequency alone would swap them (checked too, so the test can fail)."""
    rows = ["set,records,stage"]
    truth = {}
    for label, (f1, f2), stage in (("A", (300.0, 340.0), 1), ("B", (370.0, 320.0), 2)):
        M, K = _two_oscillators(f1, f2)
        mdl = lumped_model(M, K, 0.01)
        rec = lumped_records(mdl, [1.0, 0.8], n_samples=N_SAMPLES, channels=["m1", "m2"], seed=[3, stage])
        save_records(rec, tmp_path / f"{label}.nc")
        rows.append(f"{label},{label}.nc,{stage}")
        f, phi = eig_frequencies(mdl.M, mdl.C, mdl.K)
        truth[label] = f[np.argmax(np.abs(phi[0]) / np.abs(phi).sum(axis=0))]  # the mass-1 mode
    (tmp_path / "m.csv").write_text("\n".join(rows) + "\n")
    ds = fit_campaign(tmp_path / "m.csv", workers=0)
    assert list(ds["set_status"].values) == ["ok", "ok"]
    # reference A: mode 1 is the mass-1 mode (300 Hz); in B it is at ~370 Hz
    assert abs(ds["reference_frequency_hz"].values[0] - truth["A"]) < 0.5
    assert abs(ds["frequency_hz"].values[1, 0] - truth["B"]) < 0.5
    assert ds["frequency_change_pct"].values[1, 0] > 20
    assert ds["mac_to_reference"].values[1, 0] > 0.9
    assert ds["extra_modes"].values[1] == ""
    # frequency only (no shapes) pairs the 300 Hz mode with B's 320 Hz one: the swap
    pair, _ = pair_modes(sorted([370.0, 320.0]), [300.0, 340.0])
    assert list(pair) == [0, 1]


def test_bad_sets_among_good_ones(brackets, tmp_path):
    base = Path(brackets).parent
    (tmp_path / "corrupt.nc").write_bytes(b"\x89HDF\r\n\x1a\n" + b"garbage" * 50)
    manifest = tmp_path / "m.csv"
    manifest.write_text(
        "set,records,note\n"
        f"good1,{base / 'parts' / 'P001.nc'},a\n"
        "gone,nowhere/missing.nc,b\n"
        "broken,corrupt.nc,c\n"
        f"good2,{base / 'parts' / 'P002.nc'},d\n"
        f"rejected,{base / 'parts' / 'P004.nc'},e\n"
    )
    (tmp_path / "ov.csv").write_text("set,hit,accepted\nrejected,1,false\nrejected,2,false\nrejected,3,false\n")
    r = subprocess.run([sys.executable, "-m", "modalnb.cli", "campaign", str(manifest), "--out",
                        str(tmp_path / "out"), "--workers", "0", "--quiet", "--tolerance", "3",
                        "--hit-overrides", str(tmp_path / "ov.csv")],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 1, r.stderr  # some sets failed (the files say which)
    import csv

    rows = {row["set"]: row for row in csv.DictReader((tmp_path / "out" / "sets.csv").open())}
    assert rows["good1"]["status"] == rows["good2"]["status"] == "ok"
    assert rows["good2"]["verdict"] == "pass"
    assert "missing.nc" in rows["gone"]["status"] and "\n" not in rows["gone"]["status"]
    assert "corrupt.nc" in rows["broken"]["status"]
    assert rows["broken"]["verdict"] == "fail: not fitted"
    assert "hits are rejected" in rows["rejected"]["status"]
    assert not (tmp_path / "out" / "sets" / "gone").exists()
    assert "5 sets: 2 fitted, 3 failed" in r.stdout


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("set,path\na,a.nc\n", "row 1 (header): no column `records`"),
        ("records,x\na.nc,1\n", "row 1 (header): no column `set`"),
        ("set,records\na,a.nc\nb,b.nc\na,c.nc\n", "row 4: set label 'a' already used in row 2"),
        ("set,records\na,a.nc\n,b.nc\n", "row 3: empty `set` label"),
        ("set,records,t\na,a.nc,1\nb,b.nc\n", "row 3: 2 fields, the header has 3"),
        ("set,records\na,\n", "row 2: empty `records` path"),
    ],
)
def test_manifest_errors_are_one_line_naming_the_row(tmp_path, text, expected):
    p = tmp_path / "m.csv"
    p.write_text(text)
    with pytest.raises(ManifestError) as exc:
        read_manifest(p)
    msg = str(exc.value)
    assert expected in msg and "\n" not in msg and str(p) in msg


def test_manifest_not_a_csv_and_cli_exit_2(tmp_path):
    p = tmp_path / "m.csv"
    p.write_bytes(b"\x00\x01\x02binary")
    with pytest.raises(ManifestError, match="not a CSV"):
        read_manifest(p)
    p.write_text("set,records\na,a.nc\na,b.nc\n")
    r = subprocess.run([sys.executable, "-m", "modalnb.cli", "campaign", str(p), "--out",
                        str(tmp_path / "out")], capture_output=True, text=True, timeout=120)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "row 3" in lines[0] and lines[0].startswith("modalnb: error:")


def test_hit_overrides_csv_reaches_the_sets_fit(brackets, tmp_path):
    ov = tmp_path / "ov.csv"
    ov.write_text("set,hit,accepted\nP002,2,false\n")
    fit_campaign(brackets, workers=0, out=tmp_path / "out", hit_overrides=ov)
    import csv

    hits = {r["hit"]: r["accepted"] for r in csv.DictReader((tmp_path / "out" / "sets" / "P002" / "hits.csv").open())}
    assert hits == {"1": "true", "2": "false", "3": "true"}
    other = {r["hit"]: r["accepted"] for r in csv.DictReader((tmp_path / "out" / "sets" / "P001" / "hits.csv").open())}
    assert other["2"] == "true"
    ov.write_text("set,hit,accepted\nP999,2,false\n")
    with pytest.raises(ManifestError, match="row 2: set 'P999' is not in the manifest"):
        fit_campaign(brackets, workers=0, hit_overrides=ov)
