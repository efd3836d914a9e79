"""Reconcile returned device counts with the exported job: energies, mitigation, diagnostics.

Estimates (all in hartree, each with a bootstrap 95% confidence interval):

* ``raw`` -- sum of ``c_i <P_i>`` from the scale-1 measurement circuits' counts;
* ``readout_mitigated`` -- the same after readout mitigation by per-qubit calibration
  matrices (per-qubit inverse + projection onto probabilities, see
  :mod:`eigensweep.device.mitigation`);
* ``symmetry_verified`` -- post-selection on known Z2 symmetries (Bonet-Monroig et al., PRA 98,
  062339 (2018); McArdle, Yuan, Benjamin, PRL 122, 180501 (2019)) for every group in whose
  measured basis a symmetry generator is diagonal; the kept fraction of shots is reported;
* ``zne_linear`` / ``zne_richardson`` -- zero-noise extrapolation of the energy over the odd
  folding scale factors (Temme, Bravyi, Gambetta, PRL 119, 180509 (2017); Giurgica-Tiron et
  al., IEEE QCE 2020, arXiv:2005.10921), applied to readout-mitigated energies when calibration
  circuits are present (readout error is not amplified by folding, so it is removed first).
  With two scale factors the two are the same straight line: only ``zne_linear`` is reported.

Confidence intervals use the percentile bootstrap (Efron, Ann. Statist. 7, 1 (1979)): every
circuit's counts, calibration circuits included, are resampled multinomially with the observed
frequencies and the whole pipeline is re-run per replicate (seeded).
"""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np

from eigensweep.device import mitigation as mit
from eigensweep.device.manifest import as_manifest, logical_counts, pauli_labels

__all__ = [
    "BootstrapEnergy",
    "CircuitDiagnostics",
    "ReconcileResult",
    "reconcile",
    "plot_histograms",
]

ESTIMATES = ("raw", "readout_mitigated", "symmetry_verified", "zne_linear", "zne_richardson")


@dataclass
class BootstrapEnergy:
    """A point estimate with its bootstrap percentile 95% interval and standard error."""

    value: float
    ci_low: float
    ci_high: float
    stderr: float

    def covers(self, energy: float) -> bool:
        return bool(self.ci_low <= energy <= self.ci_high)


@dataclass
class CircuitDiagnostics:
    """Per-circuit comparison of returned and ideal distributions."""

    circuit_id: str
    kind: str
    group: int | None
    scale_factor: int
    shots_requested: int
    shots_returned: int
    tvd: float  # total-variation distance returned vs ideal
    kept_fraction: float | None  # symmetry verification (scale-1 measure circuits only)
    top: list[tuple[str, float, float]]  # (bitstring, returned prob, ideal prob)


@dataclass
class ReconcileResult:
    """Everything :func:`reconcile` found; see the module docstring for the estimates."""

    job_id: str
    n_qubits: int
    raw: BootstrapEnergy
    readout_mitigated: BootstrapEnergy | None
    symmetry_verified: BootstrapEnergy | None
    zne_linear: BootstrapEnergy | None
    zne_richardson: BootstrapEnergy | None
    kept_fraction: float | None
    scale_factors: list[int]
    scale_energies: list[BootstrapEnergy]
    zne_input: str
    calibration: np.ndarray | None
    circuits: list[CircuitDiagnostics]
    energy_sim: float | None = None
    energy_exact: float | None = None
    bootstrap: int = 0
    seed: int = 0
    notes: list[str] = field(default_factory=list)
    samples: dict[str, np.ndarray] = field(default_factory=dict, repr=False)

    def estimates(self) -> dict[str, BootstrapEnergy]:
        """The available estimates by name, in a fixed order."""
        return {k: getattr(self, k) for k in ESTIMATES if getattr(self, k) is not None}

    def comparison_table(self) -> str:
        """Markdown table of all estimates beside the simulated and exact energies."""

        def err(v: float, ref: float | None) -> str:
            return "" if ref is None or not np.isfinite(v) else f"{(v - ref) * 1e3:+.2f}"

        lines = [
            "| estimate | energy (Ha) | 95% CI (Ha) | minus simulated (mHa) | minus exact (mHa) |",
            "|---|---|---|---|---|",
        ]
        for name, e in self.estimates().items():
            label = name.replace("_", " ")
            if name == "symmetry_verified" and self.kept_fraction is not None:
                label += f" (kept {self.kept_fraction:.1%})"
            lines.append(
                f"| {label} | {e.value:.6f} | [{e.ci_low:.6f}, {e.ci_high:.6f}] | "
                f"{err(e.value, self.energy_sim)} | {err(e.value, self.energy_exact)} |"
            )
        if self.energy_sim is not None:
            lines.append(
                f"| simulated (noise-free) | {self.energy_sim:.6f} | | | "
                f"{err(self.energy_sim, self.energy_exact)} |"
            )
        if self.energy_exact is not None:
            lines.append(f"| exact | {self.energy_exact:.6f} | | | |")
        return "\n".join(lines) + "\n"

    # ------------------------------------------------------------------ storage
    def to_store(self) -> tuple[dict[str, np.ndarray], dict]:
        """(arrays, JSON-serialisable meta) for an HDF5 store; inverse of :meth:`from_store`."""
        arrays = {f"samples/{k}": np.asarray(v, dtype=float) for k, v in self.samples.items()}
        arrays["tvd"] = np.array([c.tvd for c in self.circuits], dtype=float)
        if self.calibration is not None:
            arrays["calibration"] = np.asarray(self.calibration, dtype=float)
        meta = {
            "kind": "eigensweep-reconcile-result",
            "version": 1,
            "job_id": self.job_id,
            "n_qubits": self.n_qubits,
            "estimates": {k: _est_dict(getattr(self, k)) for k in ESTIMATES},
            "kept_fraction": self.kept_fraction,
            "scale_factors": list(self.scale_factors),
            "scale_energies": [_est_dict(e) for e in self.scale_energies],
            "zne_input": self.zne_input,
            "circuits": [asdict(c) for c in self.circuits],
            "energy_sim": self.energy_sim,
            "energy_exact": self.energy_exact,
            "bootstrap": self.bootstrap,
            "seed": self.seed,
            "notes": list(self.notes),
            "has_calibration": self.calibration is not None,
        }
        return arrays, json.loads(json.dumps(meta))

    @classmethod
    def from_store(cls, arrays: Mapping[str, np.ndarray], meta: Mapping) -> ReconcileResult:
        """Rebuild a result from :meth:`to_store` output."""
        if meta.get("kind") != "eigensweep-reconcile-result":
            raise ValueError("not an eigensweep reconcile result")
        est = {k: _est_from(meta["estimates"].get(k)) for k in ESTIMATES}
        circuits = [
            CircuitDiagnostics(**{**c, "top": [tuple(t) for t in c["top"]]})
            for c in meta["circuits"]
        ]
        samples = {
            k.split("/", 1)[1]: np.asarray(v) for k, v in arrays.items() if k.startswith("samples/")
        }
        return cls(
            job_id=meta["job_id"],
            n_qubits=int(meta["n_qubits"]),
            **est,
            kept_fraction=meta["kept_fraction"],
            scale_factors=[int(s) for s in meta["scale_factors"]],
            scale_energies=[_est_from(e) for e in meta["scale_energies"]],
            zne_input=meta["zne_input"],
            calibration=np.asarray(arrays["calibration"]) if meta["has_calibration"] else None,
            circuits=circuits,
            energy_sim=meta["energy_sim"],
            energy_exact=meta["energy_exact"],
            bootstrap=int(meta["bootstrap"]),
            seed=int(meta["seed"]),
            notes=list(meta["notes"]),
            samples=samples,
        )


def _est_dict(e: BootstrapEnergy | None) -> dict | None:
    return None if e is None else asdict(e)


def _est_from(d: Mapping | None) -> BootstrapEnergy | None:
    return None if d is None else BootstrapEnergy(**{k: float(v) for k, v in d.items()})


# ----------------------------------------------------------------------------- core


def _estimate(samples: np.ndarray) -> BootstrapEnergy:
    """Replicate 0 is the point estimate; 1.. are bootstrap replicates."""
    point = float(samples[0])
    boot = samples[1:]
    boot = boot[np.isfinite(boot)]
    if boot.size < 2:
        return BootstrapEnergy(point, point, point, 0.0)
    lo, hi = np.percentile(boot, [2.5, 97.5])
    return BootstrapEnergy(point, float(lo), float(hi), float(np.std(boot, ddof=1)))


def _resample(counts: np.ndarray, n_boot: int, rng: np.random.Generator) -> np.ndarray:
    """(1 + n_boot, 2**n) probabilities: observed, then multinomial bootstrap replicates."""
    total = int(counts.sum())
    p = counts / total
    out = np.empty((1 + n_boot, counts.size))
    out[0] = p
    if n_boot:
        out[1:] = rng.multinomial(total, p, size=n_boot) / total
    return out


def _check_hamiltonian(manifest: dict, ham) -> float:
    """Check the manifest was built for ``ham``; return its identity coefficient."""
    n = int(manifest["n_qubits"])
    if int(ham.n_qubits) != n:
        raise ValueError(f"Hamiltonian has {ham.n_qubits} qubits, the job {n}")
    labels = pauli_labels(ham)
    coeffs = np.real(np.asarray(ham.coeffs)).astype(float).reshape(-1)
    for t in manifest["hamiltonian"]["terms"]:
        i = int(t["index"])
        if (
            i >= len(labels)
            or labels[i] != t["label"]
            or abs(coeffs[i] - t["coeff"]) > 1e-9 * max(1.0, abs(t["coeff"]))
        ):
            raise ValueError(
                "the job manifest was built for a different Hamiltonian "
                f"(term {i} {t['label']!r}); reconcile with the Hamiltonian it was exported for"
            )
    identity = float(sum(c for c, lab in zip(coeffs, labels, strict=True) if set(lab) == {"I"}))
    if abs(identity - float(manifest["hamiltonian"]["identity"])) > 1e-9 * max(1, abs(identity)):
        raise ValueError("the job manifest's identity coefficient differs from the Hamiltonian")
    return identity


def _symmetries(
    generators, sector, n_electrons, mapping, n: int, notes: list[str]
) -> list[tuple[str, int]]:
    """List of (label, required eigenvalue of the Pauli string) usable for verification."""
    if generators is not None:
        if int(generators.n_qubits) != n:
            notes.append(
                f"symmetry generators act on {generators.n_qubits} qubits, the job on {n}: "
                "not used (tapered problems carry no symmetries left to verify)"
            )
            return []
        if sector is None or len(sector) != len(pauli_labels(generators)):
            raise ValueError("give one sector value (+1 or -1) per symmetry generator")
        coeffs = np.real(np.asarray(generators.coeffs)).reshape(-1)
        out = []
        for lab, c, s in zip(pauli_labels(generators), coeffs, sector, strict=True):
            if int(s) not in (1, -1):
                raise ValueError(f"sector values must be +1 or -1, got {s!r}")
            out.append((lab, int(s) * (1 if c >= 0 else -1)))
        return out
    if n_electrons is not None:
        if mapping in (None, "jordan_wigner"):
            return [("Z" * n, -1 if int(n_electrons) % 2 else 1)]
        notes.append(
            f"electron-number parity check is only implemented for Jordan-Wigner, "
            f"not {mapping!r}: no symmetry verification"
        )
    return []


def _applicable(basis: str, label: str) -> bool:
    """A generator is diagonal in a group's measured basis if it matches it on its support."""
    eff = basis.replace("I", "Z")
    return all(g == "I" or g == b for g, b in zip(label, eff, strict=True))


def _top(ret: np.ndarray, ideal: np.ndarray, n: int, k: int = 8) -> list:
    order = list(np.argsort(-ideal, kind="stable")[:k]) + list(np.argsort(-ret, kind="stable")[:k])
    idx = list(dict.fromkeys(int(i) for i in order if ret[i] > 0 or ideal[i] > 0))
    idx.sort(key=lambda i: (-ideal[i], -ret[i], i))
    return [(format(i, f"0{n}b"), float(ret[i]), float(ideal[i])) for i in idx[:k]]


def reconcile(
    job,
    counts: Mapping,
    ham,
    *,
    generators=None,
    sector: Sequence[int] | None = None,
    n_electrons: int | None = None,
    mapping: str | None = None,
    bootstrap: int = 1000,
    seed: int = 0,
    energy_sim: float | None = None,
    energy_exact: float | None = None,
) -> ReconcileResult:
    """Energies and diagnostics from validated counts (``load_results`` output).

    ``job`` is the manifest dict (or a DeviceJob / job folder); ``counts`` maps circuit id to
    ``{bitstring: count}`` (a full results object is accepted too). ``generators``/``sector``
    are the Z2 symmetries (pre-tapering, on the job's qubits) and their eigenvalues; without
    them, ``n_electrons`` gives the number-parity symmetry ``Z...Z = (-1)^N`` for the
    Jordan-Wigner mapping (``mapping`` None means the project's default, Jordan-Wigner).
    """
    manifest = as_manifest(job)
    if "results" in counts and "format" in counts:
        counts = {cid: r["counts"] for cid, r in counts["results"].items()}
    # returned bitstrings are in physical bit order; the manifest's final permutation maps
    # them to logical qubits (the identity for the generic target)
    counts = {cid: logical_counts(c, manifest) for cid, c in counts.items()}
    n = int(manifest["n_qubits"])
    identity = _check_hamiltonian(manifest, ham)
    records = manifest["circuits"]
    notes: list[str] = []
    rng = np.random.default_rng(np.random.SeedSequence([int(seed), 20180509]))
    n_boot = int(bootstrap)
    vec, streams = _count_vectors(records, counts, n, rng)
    draw = {cid: (lambda cid=cid: _resample(vec[cid], n_boot, streams[cid])) for cid in vec}
    matrices = _readout_matrices(records, draw, n, notes)
    symm = _symmetries(generators, sector, n_electrons, mapping, n, notes)
    meas, scales = _measurement_records(records, notes)
    sums = _EnergySums(scales, 1 + n_boot, identity)
    readout = None if matrices is None else mit.confusion_inverse(matrices, 1 + n_boot)
    for rec in meas:
        sums.add(
            rec, draw[rec["circuit_id"]](), readout, symm, n, int(vec[rec["circuit_id"]].sum())
        )
    samples, kept_fraction = sums.samples(matrices is not None, bool(symm), notes)
    per_scale = sums.e_mit if matrices is not None else sums.e_raw
    samples.update(_zero_noise_samples(scales, per_scale, notes))
    for s in scales:
        samples[f"scale_{s}"] = per_scale[s]
    diags = _diagnostics(records, vec, sums.kept_by_id, n, notes)
    est = {k: _estimate(v) for k, v in samples.items() if not k.startswith("scale_")}
    return ReconcileResult(
        job_id=manifest["job_id"],
        n_qubits=n,
        raw=est["raw"],
        readout_mitigated=est.get("readout_mitigated"),
        symmetry_verified=est.get("symmetry_verified"),
        zne_linear=est.get("zne_linear"),
        zne_richardson=est.get("zne_richardson"),
        kept_fraction=kept_fraction,
        scale_factors=scales,
        scale_energies=[_estimate(per_scale[s]) for s in scales],
        zne_input="readout_mitigated" if matrices is not None else "raw",
        calibration=None if matrices is None else matrices[0],
        circuits=diags,
        energy_sim=None if energy_sim is None else float(energy_sim),
        energy_exact=None if energy_exact is None else float(energy_exact),
        bootstrap=n_boot,
        seed=int(seed),
        notes=notes,
        samples=samples,
    )


def _count_vectors(records, counts: Mapping, n: int, rng: np.random.Generator):
    """Each circuit's counts as a ``2**n`` vector, and its own bootstrap stream (so memory
    stays one circuit at a time)."""
    missing = [r["circuit_id"] for r in records if r["circuit_id"] not in counts]
    if missing:
        raise ValueError(f"no counts for circuit {missing[0]!r}; load them with load_results")
    vec = {r["circuit_id"]: mit.counts_to_vector(counts[r["circuit_id"]], n) for r in records}
    for cid, v in vec.items():
        if v.sum() <= 0:
            raise ValueError(f"circuit {cid!r} has zero shots")
    return vec, dict(zip(vec, rng.spawn(len(vec)), strict=True))


def _readout_matrices(records, draw, n: int, notes: list[str]) -> np.ndarray | None:
    """Per-qubit confusion matrices (one set per replicate) from the calibration circuits."""
    cal = {r.get("prepared"): r["circuit_id"] for r in records if r["kind"] == "calibration"}
    if "0" * n not in cal or "1" * n not in cal:
        notes.append("no all-zeros/all-ones calibration circuits: no readout mitigation")
        return None
    matrices = mit.per_qubit_confusion_matrices(draw[cal["0" * n]](), draw[cal["1" * n]](), n)
    if np.any(np.abs(np.linalg.det(matrices)) < 1e-6):
        notes.append("a readout confusion matrix is singular: no readout mitigation")
        return None
    return matrices


def _measurement_records(records, notes: list[str]) -> tuple[list[dict], list[int]]:
    """The measurement records and their sorted scale factors (the lowest gives ``raw``)."""
    meas = [r for r in records if r["kind"] == "measure"]
    if not meas:
        raise ValueError("the job has no measurement circuits; nothing to reconcile")
    scales = sorted({int(r["scale_factor"]) for r in meas})
    if 1 not in scales:
        notes.append(f"no scale-1 circuits: raw energy uses scale {scales[0]}")
    return meas, scales


def _group_energy(rec: dict, p: np.ndarray) -> np.ndarray:
    """``sum_i c_i <P_i>`` of one circuit's terms, per replicate (rows of ``p``)."""
    labels = [t["label"] for t in rec["pauli_terms"]]
    coeffs = np.array([t["coeff"] for t in rec["pauli_terms"]], dtype=float)
    return mit.term_expectations(p, labels) @ coeffs


class _EnergySums:
    """Energy replicates summed over the measurement circuits: raw and readout-mitigated per
    scale factor, symmetry-verified at the lowest scale."""

    def __init__(self, scales: list[int], width: int, identity: float) -> None:
        self.s0 = scales[0]
        self.e_raw = {s: np.full(width, identity) for s in scales}
        self.e_mit = {s: np.full(width, identity) for s in scales}
        self.e_sym = np.full(width, identity)
        self.kept_by_id: dict[str, float] = {}
        self.kept_tot, self.shots_tot = 0.0, 0.0
        self.any_verified = False

    def add(self, rec: dict, p: np.ndarray, readout, symm, n: int, shots: int) -> None:
        """Add one circuit's replicates ``p``; ``readout`` is :func:`mit.confusion_inverse`."""
        s = int(rec["scale_factor"])
        self.e_raw[s] += _group_energy(rec, p)
        if readout is not None:
            mitigated = mit.project_to_simplex(mit.apply_confusion_inverse(p, readout))
            self.e_mit[s] += _group_energy(rec, mitigated)
        if s != self.s0:
            return
        usable = [(lab, ev) for lab, ev in symm if _applicable(rec["basis"], lab)]
        if not usable:
            self.e_sym += _group_energy(rec, p)
            return
        self.any_verified = True
        sup = [[ch != "I" for ch in lab] for lab, _ in usable]
        mask = mit.symmetry_mask(sup, [ev for _, ev in usable], n)
        kept = p[:, mask].sum(axis=1)
        ps = np.where(mask[None, :], p, 0.0)
        with np.errstate(invalid="ignore", divide="ignore"):
            ps = ps / kept[:, None]
        self.e_sym += _group_energy(rec, ps)  # NaN where nothing was kept
        self.kept_by_id[rec["circuit_id"]] = float(kept[0])
        self.kept_tot += float(kept[0]) * shots
        self.shots_tot += shots

    def samples(self, mitigated: bool, any_symmetry: bool, notes: list[str]):
        """(``raw``/``readout_mitigated``/``symmetry_verified`` replicates, kept fraction)."""
        out: dict[str, np.ndarray] = {"raw": self.e_raw[self.s0]}
        if mitigated:
            out["readout_mitigated"] = self.e_mit[self.s0]
        if not self.any_verified:
            if any_symmetry:
                notes.append(
                    "no measured group is diagonal in a symmetry generator: no verification"
                )
            return out, None
        out["symmetry_verified"] = self.e_sym
        if not np.isfinite(self.e_sym[0]):
            notes.append("symmetry verification kept no shots in some circuit")
        return out, self.kept_tot / self.shots_tot


def _zero_noise_samples(scales: list[int], per_scale, notes: list[str]) -> dict[str, np.ndarray]:
    """Linear and (with three or more scales) Richardson zero-noise extrapolations."""
    if len(scales) < 2:
        notes.append("one noise-scale factor only: no zero-noise extrapolation")
        return {}
    stack = np.stack([per_scale[s] for s in scales], axis=1)
    out = {"zne_linear": mit.line_fit_zero_noise_value(scales, stack)}
    if len(scales) > 2:
        out["zne_richardson"] = mit.richardson_zero_noise_value(scales, stack)
    else:  # the polynomial of degree 1 through two points is the straight line
        notes.append(
            "two noise-scale factors: Richardson extrapolation is the linear one, "
            "reported once as zne_linear"
        )
    return out


def _diagnostics(records, vec, kept_by_id, n: int, notes: list[str]) -> list[CircuitDiagnostics]:
    """Returned vs ideal distribution of every circuit (and a note on short shot counts)."""
    diags = []
    for rec in records:
        cid = rec["circuit_id"]
        ideal = np.zeros(2**n)
        for bits, pr in rec.get("ideal_distribution", {}).items():
            ideal[int(bits, 2)] = pr
        ret = vec[cid] / vec[cid].sum()
        diags.append(
            CircuitDiagnostics(
                circuit_id=cid,
                kind=rec["kind"],
                group=rec.get("group"),
                scale_factor=int(rec["scale_factor"]),
                shots_requested=int(rec["shots"]),
                shots_returned=int(vec[cid].sum()),
                tvd=float(mit.total_variation_distance(ret, ideal)),
                kept_fraction=kept_by_id.get(cid),
                top=_top(ret, ideal, n),
            )
        )
        if int(vec[cid].sum()) != int(rec["shots"]):
            notes.append(f"{cid}: {int(vec[cid].sum())} shots returned, {rec['shots']} requested")
    return diags


def plot_histograms(
    result: ReconcileResult,
    path: str | Path,
    *,
    max_circuits: int = 12,
    start: int = 0,
    note: str = "",
    pdf: bool = False,
) -> Path:
    """Bar charts of returned vs ideal probabilities of the top bitstrings, one panel per circuit.

    Measurement circuits come first (lowest scale factor first), then calibration circuits;
    panels ``start`` to ``start + max_circuits`` of that order (page through with ``start``),
    ``note`` as the figure's title, one legend for the page (never over the bars), the
    colour-blind-safe palette of :mod:`eigensweep.figures`. Written with matplotlib's Agg canvas
    (no display needed); with ``pdf`` also as ``path`` with suffix ``.pdf``.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from eigensweep.figures import DPI, PALETTE

    diags = sorted(
        result.circuits,
        key=lambda c: (c.kind != "measure", c.scale_factor, c.group or 0, c.circuit_id),
    )[start : start + max_circuits]
    ncols = min(3, max(1, len(diags)))
    nrows = max(1, -(-len(diags) // ncols))
    fig = Figure(figsize=(4.2 * ncols, 3.2 * nrows + 0.6), layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(nrows, ncols, squeeze=False).ravel()
    for ax, d in zip(axes, diags, strict=False):
        labels = [t[0] for t in d.top]
        x = np.arange(len(labels))
        ax.bar(
            x - 0.2,
            [t[1] for t in d.top],
            width=0.4,
            color=PALETTE[0],
            label="returned by the device",
        )
        ax.bar(
            x + 0.2, [t[2] for t in d.top], width=0.4, color=PALETTE[1], label="ideal (noise-free)"
        )
        ax.set_xticks(x, labels, rotation=60, fontsize=7, family="monospace")
        ax.set_xlabel("bitstring (qubit 0 first)")
        ax.set_ylabel("probability")
        if d.kind == "measure":
            what = f"group {d.group}, noise scale {d.scale_factor}"
        else:
            what = "readout calibration, all " + d.circuit_id.split("-")[-1]
        ax.set_title(f"{what} ({d.circuit_id}), TVD {d.tvd:.3f}", fontsize=8.5)
    for ax in axes[len(diags) :]:
        ax.set_visible(False)
    handles, names = axes[0].get_legend_handles_labels()
    fig.legend(
        handles,
        names,
        loc="outside lower center",
        ncols=2,
        frameon=False,
        fontsize=9,
    )
    top = max((len(d.top) for d in diags), default=0)
    fig.suptitle(
        (note + "\n" if note else "") + f"the {top} most likely bitstrings of each circuit",
        fontsize=10,
    )
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, dpi=DPI if path.suffix == ".png" else None)
    if pdf:
        fig.savefig(path.with_suffix(".pdf"), metadata={"CreationDate": None})
    return path
