"""Sweep summary table and plots.

``results/summary.csv`` has one row per optimize job (energies in hartree, errors in mHa);
plots go to ``results/plots/``: one energy curve per molecule (VQE vs the classical ladder),
one error-vs-exact plot per molecule with the accuracy band, and convergence traces.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np

from .store import atomic_path, read_stage

REFERENCE_COLUMNS = {
    "energy_hf": "hf",
    "energy_mp2": "mp2",
    "energy_ccsd": "ccsd",
    "energy_ccsd_t": "ccsd_t",
    "energy_exact": "casci",
    "energy_fci": "fci",
}

SUMMARY_COLUMNS = [
    "molecule",
    "point",
    "basis",
    "unit",
    "charge",
    "multiplicity",
    "mapping",
    "tapered",
    "n_qubits",
    "n_terms",
    "n_qwc_groups",
    "shots_one_norm_bound",
    "shots_variance_at_reference",
    "ansatz",
    "optimizer",
    "estimator",
    "n_params",
    "energy",
    "energy_stderr",
    *REFERENCE_COLUMNS,
    "ladder_reference",
    "error_mha",
    "below_exact",
    "below_exact_cause",
    "overlap_exact",
    "n_electrons",
    "spin_square",
    "spin_mismatch",
    "cnot_count",
    "depth",
    "evaluations",
    "converged",
    "stop_reason",
    "wall_s",
    "key",
]


def summary_rows(rows: list[dict], results: str | Path = "results") -> list[dict]:
    """Summary rows for the plan's optimize jobs (reads optimize and integrals stage files)."""
    results = Path(results)
    cache: dict[str, dict] = {}
    out = []
    for row in rows:
        k_int = row["key_integrals"]
        if k_int not in cache:
            cache[k_int] = read_stage(results / "integrals" / f"{k_int}.h5", stage="integrals").meta
        refs = {k: _num(v) for k, v in cache[k_int]["references"].items()}
        k_tap = row["key_taper"]
        if k_tap not in cache:
            cache[k_tap] = read_stage(results / "taper" / f"{k_tap}.h5", stage="taper").meta
        tap = cache[k_tap]
        opt = read_stage(results / "optimize" / f"{row['key']}.h5", stage="optimize")
        m = opt.meta
        energy = float(m["energy"])
        exact = refs["casci"]
        err = (energy - exact) * 1000.0 if math.isfinite(exact) else float("nan")
        r = {c: row.get(c, "") for c in SUMMARY_COLUMNS}
        r.update({k: v for k, v in row.items() if k.startswith("scan_")})
        r.update(
            {
                "n_qubits": m["n_qubits"],
                "n_terms": tap.get("n_terms", ""),
                "n_qwc_groups": tap.get("n_qwc_groups", ""),
                "shots_one_norm_bound": tap.get("shots_one_norm_bound", ""),
                "shots_variance_at_reference": tap.get("shots_variance_at_reference") or "",
                "n_params": m["n_params"],
                "energy": energy,
                "energy_stderr": float(m.get("energy_stderr", 0.0)),
                **{col: float(refs[name]) for col, name in REFERENCE_COLUMNS.items()},
                "ladder_reference": cache[k_int].get("scf_method", ""),
                "error_mha": err,
                # variational check: more than 1e-6 Eh below the sector-exact energy is a red flag
                "below_exact": bool(math.isfinite(err) and err < -1e-3),
                "below_exact_cause": _below_exact_cause(err, m),
                "overlap_exact": _num(m.get("overlap_exact")),
                "n_electrons": _num(m.get("n_electrons")),
                "spin_square": _num(m.get("spin_square")),
                "spin_mismatch": m.get("spin_mismatch", ""),
                "cnot_count": m.get("cnot_count", ""),
                "depth": m.get("depth", ""),
                "evaluations": m["n_evaluations"],
                "converged": m.get("converged", ""),
                "stop_reason": m.get("stop_reason", ""),
                "wall_s": float(opt.attrs.get("wall_s", float("nan"))),
            }
        )
        out.append(r)
    return out


def _below_exact_cause(err: float, m: dict) -> str:
    """Why an energy lies below the exact one: a state of another spin (the exact reference
    fixes S) or nothing known, which is a bug."""
    if not (math.isfinite(err) and err < -1e-3):
        return ""
    if m.get("spin_mismatch"):
        return f"another spin: <S^2> = {_num(m.get('spin_square')):.4f}"
    return "unexplained: please report"


def _num(v) -> float:
    """Stored energies use null for 'not computed'; read them as nan."""
    return float("nan") if v is None else float(v)


def _fmt(v) -> str:
    if isinstance(v, float):
        return "" if math.isnan(v) else repr(v)
    return str(v)


def write_summary(rows: list[dict], path: str | Path) -> Path:
    """Write the summary CSV atomically."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    scan_cols = sorted({k for r in rows for k in r if k.startswith("scan_")})
    cols = SUMMARY_COLUMNS[:2] + scan_cols + SUMMARY_COLUMNS[2:]
    with atomic_path(path) as tmp, open(tmp, "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=cols, extrasaction="ignore")
        w.writeheader()
        for r in rows:
            w.writerow({c: _fmt(r.get(c, "")) for c in cols})
    return path


def _method_of(r: dict) -> str:
    taper = "tapered" if str(r["tapered"]) in ("True", "true") else "full"
    return f"{r['ansatz']} / {r['optimizer']} / {r['estimator']} / {r['mapping']} / {taper}"


def _xaxis(rows: list[dict]) -> tuple[str, list[float] | None]:
    scan_cols = [k for k in rows[0] if k.startswith("scan_")]
    if not scan_cols:
        return "point", None
    col = scan_cols[0]
    return col[5:], [float(r[col]) for r in rows]


def plot_molecule(rows: list[dict], folder: str | Path, accuracy_mha: float = 1.6) -> list[Path]:
    """Energy curve and error-vs-exact plots for one molecule's rows; returns written files."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    name = rows[0]["molecule"]
    xname, _ = _xaxis(rows)
    points = list(dict.fromkeys(r["point"] for r in rows))
    first = {p: next(r for r in rows if r["point"] == p) for p in points}
    x = np.array(
        [float(first[p][f"scan_{xname}"]) if xname != "point" else i for i, p in enumerate(points)]
    )
    order = np.argsort(x)
    x = x[order]
    points = [points[i] for i in order]
    files = []

    fig, ax = plt.subplots(figsize=(7, 4.5))
    ref_style = {
        "energy_hf": ("HF", "k--"),
        "energy_mp2": ("MP2", "c:"),
        "energy_ccsd": ("CCSD", "y-."),
        "energy_ccsd_t": ("CCSD(T)", "g:"),
        "energy_exact": ("exact (CASCI/FCI)", "k-"),
    }
    for col, (lab, style) in ref_style.items():
        y = np.array([float(first[p][col]) for p in points])
        if np.isfinite(y).any():
            ax.plot(x, y, style, lw=1.2, label=lab)
    methods = list(dict.fromkeys(_method_of(r) for r in rows))
    markers = "os^Dv<>ph*"
    for im, m in enumerate(methods):
        sel = {r["point"]: r for r in rows if _method_of(r) == m}
        xs = [xv for xv, p in zip(x, points, strict=True) if p in sel]
        ys = [float(sel[p]["energy"]) for p in points if p in sel]
        es = [float(sel[p]["energy_stderr"] or 0.0) for p in points if p in sel]
        # distinct open markers, shrinking, so coinciding results stay visible
        ax.errorbar(
            xs,
            ys,
            yerr=es if any(es) else None,
            fmt=markers[im % len(markers)],
            ms=max(3.0, 8.0 - 1.2 * im),
            mfc="none",
            capsize=2,
            label=f"VQE {m}",
        )
    unit = {"angstrom": "Å", "bohr": "bohr"}.get(str(rows[0].get("unit", "")), "as in config")
    ax.set_xlabel(f"{xname} ({unit if xname != 'point' else 'index'})")
    ax.set_ylabel("energy (hartree)")
    ax.set_title(f"{name}: VQE and classical references ({rows[0]['basis']})")
    ax.legend(fontsize=7)
    fig.tight_layout()
    f = folder / f"{name}_energy.png"
    fig.savefig(f, dpi=120)
    plt.close(fig)
    files.append(f)

    fig, ax = plt.subplots(figsize=(7, 4))
    ax.axhspan(0, accuracy_mha, color="tab:green", alpha=0.15, label=f"{accuracy_mha} mHa band")
    for im, m in enumerate(methods):
        sel = {r["point"]: r for r in rows if _method_of(r) == m}
        xs = [xv for xv, p in zip(x, points, strict=True) if p in sel]
        ys = [max(float(sel[p]["error_mha"]), 1e-7) for p in points if p in sel]
        ax.semilogy(
            xs,
            ys,
            "-" + markers[im % len(markers)],
            ms=max(3.0, 8.0 - 1.2 * im),
            mfc="none",
            label=m,
        )
    ax.set_xlabel(f"{xname} ({unit if xname != 'point' else 'index'})")
    ax.set_ylabel("E(VQE) - E(exact) (mHa)")
    ax.set_title(f"{name}: error against the exact sector energy")
    ax.legend(fontsize=7)
    fig.tight_layout()
    f = folder / f"{name}_error.png"
    fig.savefig(f, dpi=120)
    plt.close(fig)
    files.append(f)
    return files


def plot_traces(rows: list[dict], folder: str | Path, results: str | Path = "results") -> Path:
    """Convergence traces (energy error per evaluation) of every optimize job, one panel per molecule."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    folder = Path(folder)
    mols = list(dict.fromkeys(r["molecule"] for r in rows))
    fig, axes = plt.subplots(len(mols), 1, figsize=(7, 3 * len(mols)), squeeze=False)
    for ax, mol in zip(axes[:, 0], mols, strict=True):
        for r in (r for r in rows if r["molecule"] == mol):
            opt = read_stage(Path(results) / "optimize" / f"{r['key']}.h5", stage="optimize")
            tr = np.asarray(opt.arrays["trace_energy"], dtype=float)
            err = np.maximum((tr - float(r["energy_exact"])) * 1000.0, 1e-7)
            ax.semilogy(
                np.arange(1, len(err) + 1),
                err,
                lw=0.8,
                label=f"{r['point']} {r['ansatz']}/{r['optimizer']}",
            )
        ax.axhline(1.6, color="tab:green", lw=0.8, ls="--")
        ax.set_title(f"{mol}: convergence")
        ax.set_xlabel("energy evaluation")
        ax.set_ylabel("E - E(exact) (mHa)")
        if len(ax.lines) <= 12:
            ax.legend(fontsize=6)
    fig.tight_layout()
    f = folder / "convergence.png"
    fig.savefig(f, dpi=110)
    plt.close(fig)
    return f


def collect(
    rows: list[dict],
    results: str | Path = "results",
    accuracy_mha: float = 1.6,
    exports: list[dict] | None = None,
) -> list[Path]:
    """Write ``summary.csv``, ``device_summary.csv`` and every plot; returns the written files."""
    results = Path(results)
    summary = summary_rows(rows, results)
    files = [write_summary(summary, results / "summary.csv")]
    plots = results / "plots"
    for mol in dict.fromkeys(r["molecule"] for r in summary):
        files += plot_molecule([r for r in summary if r["molecule"] == mol], plots, accuracy_mha)
    files.append(plot_traces(summary, plots, results))
    files += write_device_outputs(exports or [], results)
    return files


DEVICE_COLUMNS = [
    "molecule",
    "point",
    "mapping",
    "tapered",
    "ansatz",
    "optimizer",
    "n_qubits",
    "n_circuits",
    "shots",
    "energy_simulated",
    "energy_exact",
    "estimate",
    "energy",
    "ci_low",
    "ci_high",
    "error_mha",
    "kept_fraction",
    "key_export",
    "key_reconcile",
]


def device_rows(exports: list[dict], results: str | Path = "results") -> list[dict]:
    """One row per (exported point, estimate kind): raw, mitigated, verified, extrapolated."""
    from .device import ReconcileResult

    results = Path(results)
    out = []
    for ex in exports:
        if not ex.get("key_reconcile"):
            continue
        exp = read_stage(results / "export" / f"{ex['key_export']}.h5", stage="export")
        rec = read_stage(results / "reconcile" / f"{ex['key_reconcile']}.h5", stage="reconcile")
        res = ReconcileResult.from_store(rec.arrays, rec.meta)
        manifest = exp.meta["manifest"]
        exact = rec.meta.get("energy_exact")
        exact = float(exact) if exact is not None else float("nan")
        for kind, est in res.estimates().items():
            if est is None:
                continue
            out.append(
                {
                    **{
                        k: ex.get(k, "")
                        for k in ("molecule", "point", "mapping", "tapered", "ansatz", "optimizer")
                    },
                    "n_qubits": exp.meta["n_qubits"],
                    "n_circuits": len(manifest["circuits"]),
                    "shots": sum(int(c["shots"]) for c in manifest["circuits"]),
                    "energy_simulated": float(exp.meta["energy_simulated"]),
                    "energy_exact": exact,
                    "estimate": kind,
                    "energy": est.value,
                    "ci_low": est.ci_low,
                    "ci_high": est.ci_high,
                    "error_mha": (est.value - exact) * 1000.0,
                    "kept_fraction": res.kept_fraction if kind == "symmetry_verified" else "",
                    "key_export": ex["key_export"],
                    "key_reconcile": ex["key_reconcile"],
                }
            )
    return out


def write_device_outputs(exports: list[dict], results: str | Path = "results") -> list[Path]:
    """``device_summary.csv`` and one returned-vs-ideal histogram per reconciled point."""
    from .device import ReconcileResult, plot_histograms

    results = Path(results)
    rows = device_rows(exports, results)
    path = results / "device_summary.csv"
    with atomic_path(path) as tmp, open(tmp, "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=DEVICE_COLUMNS)
        w.writeheader()
        for r in rows:
            w.writerow({c: _fmt(r.get(c, "")) for c in DEVICE_COLUMNS})
    files = [path]
    for ex in exports:
        if ex.get("key_reconcile"):
            rec = read_stage(results / "reconcile" / f"{ex['key_reconcile']}.h5", stage="reconcile")
            res = ReconcileResult.from_store(rec.arrays, rec.meta)
            files.append(plot_histograms(res, results / "plots" / f"device_{ex['key_export']}.png"))
    return files
