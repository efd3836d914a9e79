"""Reconciliation: energies from counts, mitigation, bootstrap intervals, storage, plots."""

from __future__ import annotations

import copy

import numpy as np
import pytest
from fixtures import h2_ansatz, h2_problem

from eigensweep.device import mitigation as mit
from eigensweep.device.manifest import build_job
from eigensweep.device.reconcile import (
    ReconcileResult,
    plot_histograms,
    reconcile,
)
from eigensweep.device.synthetic import run_synthetic_device
from eigensweep.qubit.pauli import PauliExpansion
from eigensweep.stage_table import stage_key
from eigensweep.store import read_stage, write_stage


@pytest.fixture(scope="module")
def h2():
    ham, e_fci, n_el = h2_problem()
    _, _, circ, _, e_sim = h2_ansatz()
    job = build_job(circ, ham, shots_total=60000, job_name="h2-reconcile", meta={})
    return job, job.to_manifest(), ham, e_sim, e_fci, n_el


def _run(h2, seed, **noise):
    job, manifest, ham, e_sim, e_fci, n_el = h2
    res = run_synthetic_device(job, seed=seed, **noise)
    counts = {cid: r["counts"] for cid, r in res["results"].items()}
    return reconcile(
        manifest,
        counts,
        ham,
        n_electrons=n_el,
        energy_sim=e_sim,
        energy_exact=e_fci,
        bootstrap=400,
        seed=seed,
    )


@pytest.fixture(scope="module")
def noise_free(h2):
    return _run(h2, 11)


@pytest.fixture(scope="module")
def readout_only(h2):
    return _run(h2, 12, readout_error=(0.03, 0.08))


@pytest.fixture(scope="module")
def depolarized(h2):
    return _run(h2, 13, depolarizing_1q=0.001, depolarizing_2q=0.02)


@pytest.fixture(scope="module")
def noisy(h2):
    return _run(h2, 14, readout_error=(0.02, 0.04), depolarizing_1q=0.002, depolarizing_2q=0.02)


def test_noise_free_confidence_intervals_cover_simulated_energy(h2, noise_free):
    # Efron 1979: percentile bootstrap 95% interval; noise-free counts are unbiased
    e_sim = h2[3]
    r = noise_free
    for name, est in r.estimates().items():
        assert est.covers(e_sim), (name, est)
        assert est.ci_low < est.value < est.ci_high
    assert r.kept_fraction == 1.0  # nothing leaves the sector without noise
    np.testing.assert_allclose(r.calibration, np.tile(np.eye(2), (4, 1, 1)))
    assert all(c.tvd < 2 * np.sqrt(16 / c.shots_returned) for c in r.circuits)
    assert r.raw.stderr < 0.01


def test_readout_mitigation_reduces_error(h2, readout_only):
    # readout mitigation by calibration matrices (per-qubit model): removes the readout bias
    e_sim = h2[3]
    r = readout_only
    assert abs(r.readout_mitigated.value - e_sim) < abs(r.raw.value - e_sim)
    assert abs(r.raw.value - e_sim) > 0.05  # the bias is real
    assert r.readout_mitigated.covers(e_sim)
    a = r.calibration
    np.testing.assert_allclose(a[:, 1, 0], 0.03, atol=0.015)  # P(1|0)
    np.testing.assert_allclose(a[:, 0, 1], 0.08, atol=0.02)  # P(0|1)


def test_zero_noise_extrapolation_reduces_bias(h2, depolarized):
    # Temme et al. 2017 / Giurgica-Tiron et al. 2020: extrapolating to zero noise cuts the bias
    e_sim = h2[3]
    r = depolarized
    raw_err = abs(r.raw.value - e_sim)
    assert raw_err > 0.05
    assert abs(r.zne_linear.value - e_sim) < raw_err
    assert abs(r.zne_richardson.value - e_sim) < raw_err
    assert r.zne_input == "readout_mitigated"
    e = [s.value for s in r.scale_energies]
    assert e[0] < e[1] < e[2]  # energy rises with the noise scale
    assert r.zne_richardson.stderr > r.zne_linear.stderr > r.raw.stderr * 0.9


def test_two_scale_factors_give_one_extrapolated_estimate(h2):
    # issue 20: with two noise-scale factors "linear" and "Richardson" were one number under
    # two labels
    _, _, ham, e_sim, e_fci, n_el = h2
    _, _, circ, _, _ = h2_ansatz()
    job = build_job(circ, ham, shots_total=30000, job_name="two", meta={}, scale_factors=(1, 3))
    res = run_synthetic_device(job, seed=5, depolarizing_2q=0.02)
    counts = {cid: r["counts"] for cid, r in res["results"].items()}
    r = reconcile(job.to_manifest(), counts, ham, n_electrons=n_el, bootstrap=50, seed=5)
    assert r.zne_richardson is None and "zne_richardson" not in r.estimates()
    assert any("reported once as zne_linear" in n for n in r.notes)
    # closed form: the line through (1, E1) and (3, E3) meets l = 0 at (3 E1 - E3) / 2
    e1, e3 = (s.value for s in r.scale_energies)
    assert r.zne_linear.value == pytest.approx((3 * e1 - e3) / 2, abs=1e-12)
    assert "zne richardson" not in r.comparison_table()


def test_symmetry_verification_improves_and_reports_kept_fraction(h2, noisy):
    # Bonet-Monroig et al. 2018 / McArdle et al. 2019: post-select on the parity sector
    e_sim = h2[3]
    r = noisy
    assert 0.5 < r.kept_fraction < 0.99
    assert abs(r.symmetry_verified.value - e_sim) < abs(r.raw.value - e_sim)
    verified = [c for c in r.circuits if c.kept_fraction is not None]
    assert verified and all(c.scale_factor == 1 for c in verified)
    assert "kept" in r.comparison_table()


def test_symmetry_verification_exact_on_constructed_counts(h2):
    # construct counts: ideal shots plus shots outside the sector (odd electron number)
    job, manifest, ham, e_sim, _, n_el = h2
    counts = {}
    bad_added = 0
    for rec in manifest["circuits"]:
        ideal = rec["ideal_distribution"]
        c = {b: int(round(p * 100000)) for b, p in ideal.items()}
        if rec["kind"] == "measure" and set(rec["basis"]) == {"Z"}:
            c["1000"] = c.get("1000", 0) + 7000  # one electron: parity violated
            c["1110"] = c.get("1110", 0) + 3000
            bad_added += 10000
        counts[rec["circuit_id"]] = {b: v for b, v in c.items() if v > 0}
    r = reconcile(manifest, counts, ham, n_electrons=n_el, bootstrap=50, seed=1, energy_sim=e_sim)
    z_ids = [c for c in r.circuits if c.kept_fraction is not None]
    assert len(z_ids) == 1
    good = sum(counts[z_ids[0].circuit_id].values()) - 10000
    assert z_ids[0].kept_fraction == pytest.approx(good / (good + 10000), abs=1e-12)
    assert abs(r.symmetry_verified.value - e_sim) < 1e-4  # rounding of the ideal counts only
    assert abs(r.raw.value - e_sim) > 0.01

    # the same with explicit Z2 generators (alpha and beta parity, interleaved JW)
    gens = PauliExpansion.from_strings(["ZIZI", "IZIZ"], [1.0, 1.0])
    r2 = reconcile(manifest, counts, ham, generators=gens, sector=[-1, -1], bootstrap=50)
    assert abs(r2.symmetry_verified.value - e_sim) < 1e-4
    # a wrong sector throws away the good shots instead
    r3 = reconcile(manifest, counts, ham, generators=gens, sector=[1, 1], bootstrap=50)
    assert r3.kept_fraction < 0.2


def test_symmetry_not_applicable_is_reported(h2):
    job, manifest, ham, *_ = h2
    res = run_synthetic_device(job, seed=0)
    gens = PauliExpansion.from_strings(["XXXX"], [1.0])  # diagonal in no measured basis here
    r = reconcile(manifest, res, ham, generators=gens, sector=[1], bootstrap=20)
    assert r.symmetry_verified is None and r.kept_fraction is None
    assert any("no measured group" in n for n in r.notes)
    r2 = reconcile(manifest, res, ham, n_electrons=2, mapping="bravyi_kitaev", bootstrap=20)
    assert r2.symmetry_verified is None
    assert any("Jordan-Wigner" in n for n in r2.notes)


def test_bootstrap_is_seeded(h2):
    job, manifest, ham, *_ = h2
    res = run_synthetic_device(job, seed=3, readout_error=(0.01, 0.02))
    a = reconcile(manifest, res, ham, bootstrap=100, seed=5)
    b = reconcile(manifest, res, ham, bootstrap=100, seed=5)
    c = reconcile(manifest, res, ham, bootstrap=100, seed=6)
    assert a.raw == b.raw and a.zne_linear == b.zne_linear
    assert a.raw.value == c.raw.value and a.raw.ci_low != c.raw.ci_low


def test_reconcile_rejects_other_hamiltonian_and_missing_counts(h2, noise_free):
    job, manifest, ham, *_ = h2
    res = run_synthetic_device(job, seed=0)
    other = ham * 2.0
    with pytest.raises(ValueError, match="different Hamiltonian"):
        reconcile(manifest, res, other, bootstrap=10)
    counts = {cid: r["counts"] for cid, r in res["results"].items()}
    counts.pop("cal-1")
    with pytest.raises(ValueError, match="cal-1"):
        reconcile(manifest, counts, ham, bootstrap=10)
    no_cal = copy.deepcopy(manifest)
    no_cal["circuits"] = [c for c in no_cal["circuits"] if c["kind"] != "calibration"]
    r = reconcile(no_cal, counts, ham, bootstrap=10)
    assert r.readout_mitigated is None and r.zne_input == "raw"


def test_comparison_table_and_hdf5_round_trip(noisy, tmp_path):
    r = noisy
    table = r.comparison_table()
    for row in (
        "raw",
        "readout mitigated",
        "symmetry verified",
        "zne linear",
        "zne richardson",
        "simulated (noise-free)",
        "exact",
    ):
        assert f"| {row}" in table
    arrays, meta = r.to_store()
    back = ReconcileResult.from_store(arrays, meta)
    assert back.estimates() == r.estimates()
    assert back.circuits == r.circuits
    # through the one stage-file writer and reader, as the reconcile stage stores it
    params = {"bootstrap": 1}
    key = stage_key("reconcile", params, {})
    arrays, meta = r.to_store()
    path = write_stage(
        tmp_path / f"{key}.h5",
        stage="reconcile",
        key=key,
        params=params,
        parents={},
        arrays=arrays,
        meta=meta,
    )
    sd = read_stage(path, stage="reconcile", key=key)
    loaded = ReconcileResult.from_store(sd.arrays, sd.meta)
    assert loaded.estimates() == r.estimates()
    assert loaded.circuits == r.circuits
    assert loaded.comparison_table() == table
    np.testing.assert_array_equal(loaded.samples["raw"], r.samples["raw"])
    np.testing.assert_array_equal(loaded.calibration, r.calibration)


def test_plot_histograms_writes_png(noisy, tmp_path):
    path = plot_histograms(noisy, tmp_path / "plots" / "hist.png", max_circuits=4)
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 10000


def test_mitigation_numerics():
    # per-qubit inverse undoes a known confusion exactly; simplex projection (Duchi et al. 2008)
    rng = np.random.default_rng(0)
    n = 3
    p_true = rng.dirichlet(np.ones(2**n))
    a = np.array([[[0.97, 0.06], [0.03, 0.94]], [[0.9, 0.1], [0.1, 0.9]], [[1, 0.2], [0, 0.8]]])
    full = np.kron(np.kron(a[0], a[1]), a[2])  # qubit 0 = most significant
    p_meas = full @ p_true
    np.testing.assert_allclose(
        mit.invert_confusion_per_qubit(p_meas[None], a)[0], p_true, atol=1e-12
    )
    proj = mit.project_to_simplex(np.array([[0.6, 0.6, -0.1, 0.0]]))[0]
    np.testing.assert_allclose(proj, [0.5, 0.5, 0.0, 0.0], atol=1e-12)
    assert mit.project_to_simplex(p_true[None]) == pytest.approx(p_true[None])
    # Richardson through (1, 3, 5) is exact for quadratics; linear fit exact for lines
    lam = [1, 3, 5]
    assert mit.richardson_zero_noise_value(lam, np.array([2 + 3 * x - x**2 for x in lam])) == (
        pytest.approx(2.0)
    )
    assert mit.line_fit_zero_noise_value(lam, np.array([1.0 + 0.5 * x for x in lam])) == (
        pytest.approx(1.0)
    )
    np.testing.assert_allclose(mit.richardson_weights(lam), [15 / 8, -5 / 4, 3 / 8])
