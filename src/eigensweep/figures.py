"""A study's figures: energy curves, signed errors, convergence, resources, device results.

Every figure is written as PDF and PNG (300 dpi) under ``results/<study>/plots/``.  Labels come
from one table (:data:`LABELS`, :func:`pretty`): H₂, LiH, UCCSD, L-BFGS-B, Jordan-Wigner.  Series
use the Okabe-Ito colour-blind-safe palette (Okabe & Ito, "Color Universal Design", 2008) with
distinct markers and a slight horizontal offset so that coinciding series stay visible; legends
sit outside the axes.  Errors are signed (E - E_exact) on a symmetric-log axis, so results below
the exact energy (shot noise) are drawn below zero instead of being floored; the accuracy band
is ``collect.accuracy_mha`` from the config.  Points whose optimizer did not meet its own
convergence criterion are ringed in red.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np

from .store import atomic_path, read_stage
from .study import (  # noqa: F401 (figure_stems re-exported: the one list of figure names)
    DEVICE_HISTOGRAM_FOLDER,
    figure_stems,
    reconciled_exports,
)

#: Okabe-Ito palette without yellow (too faint on white), then black.
PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*")
LINESTYLES = ("-", "--", ":", "-.", (0, (5, 1, 1, 1)), (0, (3, 1)))
DPI = 300

#: Display names of config values (molecule names, methods, mappings).
LABELS: dict[str, str] = {
    "h2": "H₂",
    "lih": "LiH",
    "beh2": "BeH₂",
    "h2o": "H₂O",
    "water": "H₂O",
    "n2": "N₂",
    "o2": "O₂",
    "ch2": "CH₂",
    "ch4": "CH₄",
    "nh3": "NH₃",
    "hf": "HF",
    "co": "CO",
    "h4": "H₄",
    "h6": "H₆",
    "uccsd": "UCCSD",
    "kupccgsd": "k-UpCCGSD",
    "hardware_efficient": "hardware-efficient",
    "adapt": "ADAPT-VQE",
    "lbfgs": "L-BFGS-B",
    "bfgs": "BFGS",
    "cobyla": "COBYLA",
    "nelder_mead": "Nelder-Mead",
    "spsa": "SPSA",
    "rbf_surrogate": "RBF surrogate",
    "adam": "Adam",
    "shot_adaptive_descent": "shot-adaptive descent (iCANS)",
    "exact": "exact energies",
    "shots": "shots",
    "noisy": "noisy shots",
    "jordan_wigner": "Jordan-Wigner",
    "bravyi_kitaev": "Bravyi-Kitaev",
    "parity": "parity",
    "raw": "raw",
    "readout_mitigated": "readout-mitigated",
    "symmetry_verified": "symmetry-verified",
    "True": "tapered",
    "False": "untapered",
    "angstrom": "Å",
    "bohr": "bohr",
    "degree": "°",
    "sto-3g": "STO-3G",
    "6-31g": "6-31G",
    "cc-pvdz": "cc-pVDZ",
}

#: Reference ladder lines on energy plots: column -> (label, colour, style).
REFERENCE_LINES = {
    "energy_hf_eh": ("HF", "0.45", "--"),
    "energy_mp2_eh": ("MP2", "#56B4E9", ":"),
    "energy_ccsd_eh": ("CCSD", "#E69F00", "-."),
    "energy_ccsd_t_eh": ("CCSD(T)", "#009E73", (0, (1, 1))),
    "energy_exact_eh": ("exact (CASCI/FCI)", "k", "-"),
}

#: A reference rung closer than this to the exact energy at every point (hartree) is labelled
#: as coinciding with it (1 microhartree, far below what the eye separates on an energy axis).
COINCIDE_EH = 1e-6

#: Axes that tell methods apart, in the order they appear in a series label.
#: 1 hartree in eV (CODATA 2018: 27.211 386 245 988).
HARTREE_EV = 27.211386245988

SERIES_KEYS = ("sweep", "ansatz", "optimizer", "estimator", "mapping", "tapered", "states")


def pretty(value) -> str:
    """Display label of a config value: ``"kupccgsd(k=3)"`` -> ``"k-UpCCGSD (k=3)"``."""
    text = str(value)
    m = re.fullmatch(r"([A-Za-z0-9_\-]+)\((.*)\)", text)
    if m:
        return f"{LABELS.get(m.group(1), m.group(1))} ({m.group(2).replace(',', ', ')})"
    return LABELS.get(text, LABELS.get(text.lower(), text))


def _plt():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def save(fig, path_stem: Path) -> list[Path]:
    """Write a figure as ``<stem>.pdf`` and ``<stem>.png`` (300 dpi); returns both paths."""
    plt = _plt()
    path_stem.parent.mkdir(parents=True, exist_ok=True)
    # the tight bounding box once for both files (``bbox_inches="tight"`` would lay the figure
    # out again for each format: a third of collect's time)
    fig.set_dpi(DPI)
    bbox = fig.get_tightbbox(fig.canvas.get_renderer()).padded(plt.rcParams["savefig.pad_inches"])
    out = []
    for ext in ("pdf", "png"):
        p = path_stem.with_suffix(f".{ext}")
        meta = {"CreationDate": None} if ext == "pdf" else None  # reproducible PDF bytes
        with atomic_path(p) as tmp:
            fig.savefig(tmp, format=ext, dpi=DPI, bbox_inches=bbox, metadata=meta)
        out.append(p)
    plt.close(fig)
    return out


def series_of(rows: list[dict]) -> tuple[list[tuple], dict[tuple, str], str]:
    """Distinct method series of some rows, a label for each and the common part as text.

    Only the axes that vary among the rows appear in the labels; the others form the common part.
    """
    keys = [tuple(str(r.get(k, "")) for k in SERIES_KEYS) for r in rows]
    series = list(dict.fromkeys(keys))
    varying = [i for i in range(len(SERIES_KEYS)) if len({s[i] for s in series}) > 1]
    common = [
        i for i in range(len(SERIES_KEYS)) if i not in varying and series[0][i] not in ("", "main")
    ]
    labels = {s: ", ".join(pretty(s[i]) for i in varying) or pretty(s[1]) for s in series}
    return series, labels, ", ".join(pretty(series[0][i]) for i in common)


def axis_of(rows: list[dict]) -> tuple[str | None, str]:
    """The scan column plotted on x and its axis label with unit, e.g. ``r (Å)``."""
    scans = [k for k in rows[0] if k.startswith("scan_")]
    if len(scans) != 1:
        return None, "scan point"
    var = rows[0].get("_scan_var", scans[0][5:])
    unit = rows[0].get("_scan_unit", "none")
    return scans[0], f"{var} ({pretty(unit)})" if unit != "none" else var


def _x(rows: list[dict], col: str | None, points: list[str]) -> np.ndarray:
    if col is None:
        return np.array([points.index(r["point"]) for r in rows], dtype=float)
    return np.array([float(r[col]) for r in rows])


def _f(v) -> float:
    try:
        return float(v)
    except (TypeError, ValueError):
        return math.nan


def _legend_outside(ax) -> None:
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=8, frameon=False)


def _method_series(ax, rows, col, points, y_of, yerr_of=None, connect=False) -> None:
    """One marker series per method, offset slightly in x; unconverged points ringed in red."""
    series, labels, _ = series_of(rows)
    xall = _x(rows, col, points)
    span = float(np.ptp(xall)) or 1.0
    n = len(series)
    for i, s in enumerate(series):
        sel = sorted(
            (r for r in rows if tuple(str(r.get(k, "")) for k in SERIES_KEYS) == s),
            key=lambda r: _x([r], col, points)[0],
        )
        x = _x(sel, col, points) + (i - (n - 1) / 2) * 0.006 * span
        y = np.array([y_of(r) for r in sel])
        err = np.array([yerr_of(r) for r in sel]) if yerr_of else None
        if err is not None and not np.any(np.nan_to_num(err) > 0):
            err = None
        colour, marker = PALETTE[i % len(PALETTE)], MARKERS[i % len(MARKERS)]
        ax.errorbar(
            x,
            y,
            yerr=err,
            fmt=marker,
            ls=LINESTYLES[i % len(LINESTYLES)] if connect else "none",
            color=colour,
            mfc="none",
            ms=6,
            lw=0.9,
            capsize=2,
            label=labels[s],
        )
        bad = np.array([str(r.get("converged")) not in ("True", "true") for r in sel])
        if bad.any():
            ax.plot(x[bad], y[bad], "o", ms=10, mfc="none", mec="red", mew=0.8)
    if any(str(r.get("converged")) not in ("True", "true") for r in rows):
        ax.plot([], [], "o", ms=10, mfc="none", mec="red", mew=0.8, label="optimizer not converged")


def _symlog(ax, values, linthresh: float, accuracy_mha: float) -> None:
    """Symmetric-log y axis spanning the data and the accuracy band, no empty negative half."""
    v = np.asarray([x for x in values if math.isfinite(x)], float)
    top = max(3.0 * accuracy_mha, 3.0 * float(v.max()) if v.size else 0.0)
    neg = v[v < -linthresh]
    bottom = 3.0 * float(neg.min()) if neg.size else -linthresh
    if neg.size:
        bottom = min(bottom, -3.0 * accuracy_mha)
    ax.set_yscale("symlog", linthresh=linthresh, linscale=0.5)
    ax.set_ylim(bottom, top)


def _title(rows: list[dict], what: str) -> str:
    _, _, common = series_of(rows)
    mol = pretty(rows[0]["molecule"])
    basis = pretty(rows[0].get("basis", ""))
    return f"{mol} ({basis}): {what}" + (f"\n{common}" if common else "")


def plot_energy(rows: list[dict], stem: Path) -> list[Path]:
    """Energy curve of one molecule: VQE series beside the classical reference ladder."""
    plt = _plt()
    col, xlabel = axis_of(rows)
    points = list(dict.fromkeys(r["point"] for r in rows))
    first = {r["point"]: r for r in reversed(rows)}
    xr = np.array([_x([first[p]], col, points)[0] for p in points])
    order = np.argsort(xr)
    fig, ax = plt.subplots(figsize=(7.5, 4.5))
    exact = np.array([_f(first[p].get("energy_exact_eh")) for p in points])[order]
    for c, (lab, colour, style) in REFERENCE_LINES.items():
        y = np.array([_f(first[p].get(c)) for p in points])[order]
        if np.isfinite(y).any():
            is_exact = c == "energy_exact_eh"
            both = np.isfinite(y) & np.isfinite(exact)
            if not is_exact and both.any() and np.all(np.abs(y - exact)[both] < COINCIDE_EH):
                lab += " (= exact)"  # drawn on top of the exact line, and said so
            ax.plot(
                xr[order],
                y,
                color=colour,
                ls=style,
                lw=2.4 if is_exact else 1.2,
                label=lab,
                zorder=1 if is_exact else 1.5,
            )
    _method_series(
        ax, rows, col, points, lambda r: _f(r["energy_eh"]), lambda r: _f(r.get("energy_stderr_eh"))
    )
    ax.set_xlabel(xlabel)
    ax.set_ylabel("energy (Eh)")
    ax.set_title(_title(rows, "VQE and classical references"), fontsize=10)
    _legend_outside(ax)
    return save(fig, stem)


def plot_error(rows: list[dict], stem: Path, accuracy_mha: float = 1.6) -> list[Path]:
    """Signed error against the exact energy (mHa) on a symmetric-log axis with error bars."""
    plt = _plt()
    col, xlabel = axis_of(rows)
    points = list(dict.fromkeys(r["point"] for r in rows))
    fig, ax = plt.subplots(figsize=(7.5, 4.5))
    ax.axhspan(-accuracy_mha, accuracy_mha, color="#009E73", alpha=0.12, lw=0, zorder=0)
    ax.axhline(
        accuracy_mha,
        color="#009E73",
        ls="--",
        lw=1.0,
        label=f"chemical accuracy ±{accuracy_mha:g} mHa",
    )
    ax.axhline(-accuracy_mha, color="#009E73", ls="--", lw=1.0)
    ax.axhline(0.0, color="k", lw=0.8)
    _method_series(
        ax,
        rows,
        col,
        points,
        lambda r: _f(r["error_mha"]),
        lambda r: 1000.0 * _f(r.get("energy_stderr_eh")),
        connect=True,
    )
    signed = [_f(r["error_mha"]) for r in rows]
    errs = np.abs(signed)
    small = errs[np.isfinite(errs) & (errs > 0)]
    linthresh = max(1e-6, min(1e-3, float(np.min(small)) if small.size else 1e-3))
    _symlog(
        ax,
        signed
        + [
            e + 2e3 * _f(r.get("energy_stderr_eh"))
            for e, r in zip(signed, rows, strict=True)
            if math.isfinite(_f(r.get("energy_stderr_eh")))
        ],
        linthresh,
        accuracy_mha,
    )
    ax.set_xlabel(xlabel)
    ax.set_ylabel("E(VQE) − E(exact) (mHa)")
    ax.set_title(
        _title(rows, f"signed error (symmetric log axis, linear below {linthresh:g} mHa)"),
        fontsize=10,
    )
    _legend_outside(ax)
    return save(fig, stem)


def plot_convergence(
    rows: list[dict], stem: Path, results: Path, accuracy_mha: float
) -> list[Path]:
    """Signed error per energy evaluation for every job of one molecule; one colour per method.

    When some jobs sample energies a second panel shows, for those jobs, the error of the
    exact energy at each traced point against the shots spent so far (log axis): the bill of
    a noisy optimization, comparable across optimizers that measure energies and gradients.
    """
    plt = _plt()
    series, labels, _ = series_of(rows)
    sampled = [r for r in rows if str(r.get("estimator", "exact")) != "exact"]
    if sampled:
        fig, (ax, ax2) = plt.subplots(1, 2, figsize=(12.0, 4.5))
    else:
        fig, ax = plt.subplots(figsize=(7.5, 4.5))
        ax2 = None
    everything: list[float] = []
    by_shots: list[float] = []
    for i, s in enumerate(series):
        first = True
        for r in rows:
            if tuple(str(r.get(k, "")) for k in SERIES_KEYS) != s:
                continue
            opt = read_stage(results / "optimize" / f"{r['key']}.h5", stage="optimize")
            exact = _f(r["energy_exact_eh"])
            err = (np.asarray(opt.arrays["trace_energy"], float) - exact) * 1000.0
            shots = str(r.get("estimator", "exact")) != "exact"
            everything += [float(e) for e in err[np.isfinite(err)]]
            style = {
                "ls": LINESTYLES[i % len(LINESTYLES)],
                "color": PALETTE[i % len(PALETTE)],
                "label": labels[s] if first else None,
            }
            ax.plot(
                np.arange(1, len(err) + 1),
                err,
                marker="." if shots else None,
                ms=2,
                lw=0.5 if shots else 1.0,
                alpha=0.6 if shots else 0.9,
                **style,
            )
            if ax2 is not None and shots and "trace_shots_cumulative" in opt.arrays:
                cum = np.asarray(opt.arrays["trace_shots_cumulative"], float)
                e_at = (np.asarray(opt.arrays["trace_energy_exact"], float) - exact) * 1000.0
                ok = np.isfinite(e_at) & (cum > 0)
                by_shots += [float(e) for e in e_at[ok]]
                ax2.plot(cum[ok], e_at[ok], lw=0.8, alpha=0.8, **style)
            first = False
    for a in (ax, ax2):
        if a is None:
            continue
        a.axhline(
            accuracy_mha,
            color="#009E73",
            ls="--",
            lw=1.0,
            label=f"chemical accuracy {accuracy_mha:g} mHa" if a is ax else None,
        )
        a.axhline(0.0, color="k", lw=0.8)
    _symlog(ax, everything, 1e-3, accuracy_mha)
    ax.set_xlabel("energy evaluation")
    ax.set_ylabel("E − E(exact) (mHa)")
    ax.set_title(_title(rows, "convergence (every scan point; one colour per method)"), fontsize=10)
    if ax2 is not None:
        _symlog(ax2, by_shots, 1e-3, accuracy_mha)
        ax2.set_xscale("log")
        ax2.set_xlabel("shots spent so far")
        ax2.set_ylabel("E_exact(θ) − E(exact) (mHa)")
        ax2.set_title("sampled jobs: exact error at each evaluated point vs shots", fontsize=10)
    _legend_outside(ax2 if ax2 is not None else ax)
    return save(fig, stem)


def plot_shots_error(seeds: list[dict], stem: Path, accuracy_mha: float = 1.6) -> list[Path]:
    """Error against total shots per (ansatz, optimizer, estimator) at each point, over seeds.

    One marker per row of ``seeds.csv`` with a sampling estimator: x the median total shots
    (bar from the fewest to the most of one seed), y the median over seeds of the state's error
    ``E_exact(theta) - E(exact)`` (bar: 25th to 75th percentile); hollow markers give the median
    ``|E(VQE) - E(exact)|`` of the reported estimate, which adds the final estimate's noise.
    The shaded band is the accuracy band.
    """
    plt = _plt()
    fig, ax = plt.subplots(figsize=(7.5, 4.5))
    rows = [
        r
        for r in seeds
        if str(r.get("estimator", "exact")) != "exact" and r["shots_total_median"] != ""
    ]
    ax.axhspan(0.0, accuracy_mha, color="#009E73", alpha=0.15, lw=0)
    ax.axhline(accuracy_mha, color="#009E73", ls="--", lw=1.0, label=f"{accuracy_mha:g} mHa")
    if not rows:
        ax.text(
            0.5,
            0.5,
            "no job of this study samples energies",
            ha="center",
            va="center",
            transform=ax.transAxes,
        )
        ax.set_axis_off()
        return save(fig, stem)
    keys = ("molecule", "point", "ansatz", "optimizer", "estimator", "mapping", "tapered")
    varying = [k for k in keys if len({str(r.get(k, "")) for r in rows}) > 1]
    methods = list(dict.fromkeys(tuple(str(r.get(k, "")) for k in keys[2:]) for r in rows))
    ys: list[float] = []
    for r in rows:
        m = methods.index(tuple(str(r.get(k, "")) for k in keys[2:]))
        x = float(r["shots_total_median"])
        y = _f(r["error_at_params_median_mha"])
        lo, hi = _f(r["error_at_params_q25_mha"]), _f(r["error_at_params_q75_mha"])
        xlo, xhi = float(r["shots_total_min"]), float(r["shots_total_max"])
        label = ", ".join(pretty(r.get(k, "")) for k in varying) or pretty(r["optimizer"])
        label += f" ({r['n_seeds']} seeds)"
        colour = PALETTE[m % len(PALETTE)]
        ax.errorbar(
            [x],
            [y],
            yerr=[[max(y - lo, 0.0)], [max(hi - y, 0.0)]],
            xerr=[[x - xlo], [xhi - x]],
            fmt=MARKERS[m % len(MARKERS)],
            color=colour,
            ms=5,
            capsize=2,
            lw=0.8,
            label=label,
        )
        a = _f(r["abs_error_median_mha"])
        if math.isfinite(a):
            ax.plot([x], [a], MARKERS[m % len(MARKERS)], mfc="none", color=colour, ms=7)
            ys.append(a)
        ys += [v for v in (y, lo, hi) if math.isfinite(v)]
    ax.set_xscale("log")
    positive = [v for v in ys if v > 0]
    if positive and min(positive) > 0:
        ax.set_yscale("log")
        ax.set_ylim(min(min(positive), accuracy_mha) / 3.0, max(max(positive), accuracy_mha) * 3.0)
    ax.set_xlabel("total shots of the job (median over seeds)")
    ax.set_ylabel("error (mHa); filled: state, hollow: reported")
    ax.set_title("error vs shots (median and spread over seeds)", fontsize=10)
    _legend_outside(ax)
    return save(fig, stem)


def plot_resources(summary: list[dict], stem: Path) -> list[Path]:
    """Qubits and CNOTs per molecule and ansatz, untapered beside tapered (medians over points)."""
    plt = _plt()
    groups = list(dict.fromkeys((r["molecule"], r["ansatz"]) for r in summary))
    fig, axes = plt.subplots(1, 2, figsize=(max(7.5, 1.6 * len(groups) + 3), 4))
    width = 0.38
    for ax, col, ylabel in ((axes[0], "n_qubits", "qubits"), (axes[1], "cnot_count", "CNOT gates")):
        for j, tapered in enumerate(("False", "True")):
            vals = []
            for mol, ans in groups:
                v = [
                    _f(r[col])
                    for r in summary
                    if (r["molecule"], r["ansatz"]) == (mol, ans) and str(r["tapered"]) == tapered
                ]
                vals.append(float(np.median(v)) if v else math.nan)
            x = np.arange(len(groups)) + (j - 0.5) * width
            bars = ax.bar(
                x,
                vals,
                width,
                color=PALETTE[j],
                label=pretty(tapered),
                hatch="//" if j else None,
                edgecolor="k",
                lw=0.5,
            )
            ax.bar_label(
                bars, labels=["" if not math.isfinite(v) else f"{v:g}" for v in vals], fontsize=7
            )
        ax.set_xticks(
            np.arange(len(groups)), [f"{pretty(m)}\n{pretty(a)}" for m, a in groups], fontsize=8
        )
        ax.set_ylabel(ylabel)
    axes[1].legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), frameon=False, fontsize=8)
    fig.suptitle(
        "Circuit resources with and without Z2 tapering (median over scan points)", fontsize=10
    )
    fig.tight_layout()
    return save(fig, stem)


def plot_noise_scaling(result, stem: Path, title: str) -> list[Path]:
    """Energy against the noise-scale factor with 95 % intervals and the zero-noise estimates."""
    plt = _plt()
    fig, ax = plt.subplots(figsize=(6.5, 4.2))
    xs = np.array(result.scale_factors, float)
    ys = np.array([e.value for e in result.scale_energies])
    lo = ys - np.array([e.ci_low for e in result.scale_energies])
    hi = np.array([e.ci_high for e in result.scale_energies]) - ys
    ax.errorbar(
        xs,
        ys,
        yerr=[lo, hi],
        fmt="o",
        color=PALETTE[0],
        capsize=3,
        label=f"measured ({pretty(result.zne_input)}), 95 % bootstrap intervals",
    )
    seen: dict[float, str] = {}
    grid = np.linspace(0.0, float(xs.max()) if xs.size else 1.0, 100)
    fits = {"linear": 1, "Richardson": len(xs) - 1}  # polynomial degree of each extrapolation
    for i, (name, est) in enumerate(
        (("linear", result.zne_linear), ("Richardson", result.zne_richardson))
    ):
        if est is None:
            continue
        key = round(est.value, 12)
        if key in seen:  # the same number under two names: one label
            continue
        seen[key] = name
        if len(xs) > fits[name]:  # the fitted curve, from the measured points down to zero
            poly = np.polynomial.Polynomial.fit(xs, ys, fits[name])
            ax.plot(grid, poly(grid), color=PALETTE[i + 1], ls=LINESTYLES[i + 1], lw=0.9)
        ax.errorbar(
            [0.08 * (2 * i - 1)],  # side by side at zero noise, so both stay visible
            [est.value],
            yerr=[[est.value - est.ci_low], [est.ci_high - est.value]],
            fmt=MARKERS[i + 1],
            color=PALETTE[i + 1],
            capsize=3,
            label=f"zero noise ({name} extrapolation)",
        )
    if result.energy_exact is not None:
        ax.axhline(result.energy_exact, color="k", lw=1.8, label="exact", zorder=1)
    if result.energy_sim is not None:
        same = (
            result.energy_exact is not None
            and abs(result.energy_sim - result.energy_exact) < COINCIDE_EH
        )
        ax.axhline(
            result.energy_sim,
            color="0.6",
            ls="--",
            lw=1.0,
            label="simulated (noise-free" + (", = exact)" if same else ")"),
            zorder=1.5,
        )
    ax.set_xlabel("noise scale factor (unitary folding)")
    ax.set_ylabel("energy (Eh)")
    ax.set_xlim(left=-0.3)
    ax.set_title(title, fontsize=10)
    _legend_outside(ax)
    return save(fig, stem)


def device_figures(
    exports: list[dict], results: Path, folder: Path, per_page: int = 12
) -> list[Path]:
    """Every device circuit's returned-vs-ideal histogram (paged, in
    ``plots/device_histograms/``) and the noise-scaling plot (``plots/zne_<export key>``)."""
    from .device import ReconcileResult, plot_histograms

    files: list[Path] = []
    jobs = reconciled_exports(exports)
    if jobs:  # a declared output of the collect rule, so it exists even when empty
        (folder / DEVICE_HISTOGRAM_FOLDER).mkdir(parents=True, exist_ok=True)
    for ex in jobs:
        rec = read_stage(results / "reconcile" / f"{ex['key_reconcile']}.h5", stage="reconcile")
        res = ReconcileResult.from_store(rec.arrays, rec.meta)
        n = len(res.circuits)
        pages = max(1, -(-n // per_page))
        for page in range(pages):
            name = f"device_{ex['key_export']}" + (f"_p{page + 1}" if pages > 1 else "")
            stem = folder / DEVICE_HISTOGRAM_FOLDER / name
            png = plot_histograms(
                res,
                stem.with_suffix(".png"),
                max_circuits=per_page,
                start=page * per_page,
                note=f"{pretty(ex['molecule'])} {ex['point']}, {pretty(ex['tapered'])}, target {ex.get('target', 'generic')}: returned vs ideal, page {page + 1} of {pages}, circuits {page * per_page + 1}-{min(n, (page + 1) * per_page)} of {n}",
                pdf=True,
            )
            files += [png, png.with_suffix(".pdf")]
        label = (
            f"{pretty(ex['molecule'])} {ex['point']}, {pretty(ex['ansatz'])}, "
            f"{pretty(ex['tapered'])}, target {ex.get('target', 'generic')}"
        )
        files += plot_noise_scaling(
            res, folder / f"zne_{ex['key_export']}", f"{label}: zero-noise extrapolation"
        )
    return files


def plot_states(rows: list[dict], stem: Path) -> list[Path]:
    """Every state's energy along the scan (one marker per method and state) over the exact
    roots (lines; the requested spin solid, the whole S_z sector dotted when asked for)."""
    plt = _plt()
    col, xlabel = axis_of(rows)
    points = list(dict.fromkeys(r["point"] for r in rows))
    fig, ax = plt.subplots(figsize=(7.5, 4.5))
    # tapered excited states are compared with their symmetry sector's roots (collect)
    sector = [str(r.get("notes", "")).startswith("tapered:") for r in rows]
    for spin, in_sector, style in (
        ("requested", False, "-"),
        ("all", False, ":"),
        ("requested", True, "-."),
        ("all", True, (0, (1, 3))),
    ):
        sel = [r for r, t in zip(rows, sector, strict=True) if r["spin"] == spin and t == in_sector]
        for n, k in enumerate(sorted({int(r["state"]) for r in sel})):
            first = {r["point"]: r for r in reversed(sel) if int(r["state"]) == k}
            pts = sorted(first, key=lambda p: _x([first[p]], col, points)[0])
            x = np.array([_x([first[p]], col, points)[0] for p in pts])
            y = np.array([_f(first[p]["energy_exact_eh"]) for p in pts])
            what = "requested spin" if spin == "requested" else "S_z sector"
            lab = f"exact roots ({what}{', tapered symmetry sector' if in_sector else ''})"
            ax.plot(x, y, color="0.4", ls=style, lw=1.0, label=lab if n == 0 else None)
    _method_series(ax, rows, col, points, lambda r: _f(r["energy_eh"]))
    ax.set_xlabel(xlabel)
    ax.set_ylabel("energy (Eh)")
    ax.set_title(_title(rows, "all states and the exact roots"), fontsize=10)
    _legend_outside(ax)
    return save(fig, stem)


def spectrum_point(rows: list[dict], choice: int | str = 0) -> tuple[str, str]:
    """The scan point of a molecule's stick spectrum (config ``collect.spectrum_point``) and a
    note when the choice is not in this scan (then the first point is used).

    Args:
        rows: the molecule's ``states.csv`` rows (scan order).
        choice: position in the scan (0 = first, -1 = last) or a point label as in the
            ``point`` column (``"r=1.2"``).
    """
    points = list(dict.fromkeys(r["point"] for r in rows))
    if not points:
        return "", ""
    if isinstance(choice, str):
        if choice in points:
            return choice, ""
        return points[0], f"spectrum_point {choice!r} is not a point of this scan"
    if -len(points) <= int(choice) < len(points):
        return points[int(choice)], ""
    return points[0], f"spectrum_point {choice} is outside this scan's {len(points)} points"


def plot_spectrum(rows: list[dict], stem: Path, point_choice: int | str = 0) -> list[Path]:
    """Stick spectrum at one scan point (``point_choice``, :func:`spectrum_point`; default the
    first): oscillator strength against excitation energy (eV) for every method with excited
    states, and the exact roots. Without excited states the figure says so in words."""
    plt = _plt()
    point, note = spectrum_point(rows, point_choice)
    sel = [r for r in rows if r["point"] == point and int(r["state"]) > 0]
    if not sel:
        return _no_spectrum(plt, rows, stem, point, note)
    fig, ax = plt.subplots(figsize=(7.5, 4.5))
    series, labels, _ = series_of(sel)
    for i, s in enumerate(series):
        mine = [r for r in sel if tuple(str(r.get(k, "")) for k in SERIES_KEYS) == s]
        x = np.array([_f(r["excitation_energy_eh"]) for r in mine]) * HARTREE_EV
        f = np.array([_f(r["oscillator_strength"]) for r in mine])
        ax.vlines(x, 0, f, color=PALETTE[i % len(PALETTE)], lw=2.0, label=labels[s])
        ax.plot(x, f, MARKERS[i % len(MARKERS)], color=PALETTE[i % len(PALETTE)], mfc="none")
    ex = {}  # one stick per exact root (a tapered series' state k is another root)
    for r in sel:
        if math.isfinite(_f(r["energy_exact_eh"])):
            ex[(r["spin"], round(_f(r["energy_exact_eh"]), 9))] = r
    xs = np.array([_exact_de(rows, r) for r in ex.values()]) * HARTREE_EV
    fs = np.array([_f(r["oscillator_strength_exact"]) for r in ex.values()])
    if np.isfinite(xs).any():
        ax.vlines(xs, 0, fs, color="k", lw=0.8, ls="--", label="exact roots (PySCF)")
    ax.set_xlabel("excitation energy (eV)")
    ax.set_ylabel("oscillator strength f")
    what = f"stick spectrum at {point}" + (f" ({note}; first point shown)" if note else "")
    ax.set_title(_title(rows, what), fontsize=10)
    _legend_outside(ax)
    return save(fig, stem)


def _no_spectrum(plt, rows: list[dict], stem: Path, point: str, note: str) -> list[Path]:
    """A figure that says in words why there is no stick spectrum (no empty axes)."""
    fig, ax = plt.subplots(figsize=(7.5, 2.6))
    ax.axis("off")
    has_any = any(int(r["state"]) > 0 for r in rows)
    mol = f"{pretty(rows[0]['molecule'])} ({pretty(rows[0].get('basis', ''))})" if rows else ""
    if has_any:
        head = f"No excited states of {mol} at {point}"
        hint = "they were computed at other scan points: set collect.spectrum_point to one of them"
    else:
        head = f"No excited states{' of ' + mol if mol else ''} in this study"
        hint = (
            "methods.states holds only 'ground': add vqd, ssvqe or qeom "
            "(with references.nroots >= n_states) for a stick spectrum"
        )
    lines = [head, hint] + ([f"({note}; first point used)"] if note else [])
    ax.text(0.5, 0.62, lines[0], ha="center", va="center", fontsize=13, transform=ax.transAxes)
    ax.text(
        0.5,
        0.32,
        "\n".join(lines[1:]),
        ha="center",
        va="center",
        fontsize=9,
        color="0.3",
        transform=ax.transAxes,
    )
    ax.set_title("stick spectrum (oscillator strength vs excitation energy)", fontsize=10)
    return save(fig, stem)


def _exact_de(rows: list[dict], r: dict) -> float:
    """Exact excitation energy of a state row: its exact root minus the exact root 0."""
    ground = [
        q
        for q in rows
        if q["point"] == r["point"] and q["spin"] == r["spin"] and int(q["state"]) == 0
    ]
    return _f(r["energy_exact_eh"]) - _f(ground[0]["energy_exact_eh"]) if ground else math.nan


def study_figures(
    summary: list[dict],
    exports: list[dict],
    results: Path,
    folder: Path,
    accuracy_mha: float = 1.6,
    seeds: list[dict] | None = None,
    states: list[dict] | None = None,
    spectrum_point: int | str = 0,
) -> list[Path]:
    """All figures of a study; returns the written files. ``seeds``: the study's
    ``seeds.csv`` rows (:func:`eigensweep.collect.seed_rows`), ``states`` its ``states.csv``
    rows (:func:`eigensweep.collect.state_rows`), passed in by collect; ``spectrum_point``
    the config's ``collect.spectrum_point`` (:func:`spectrum_point`)."""
    files: list[Path] = []
    for mol in dict.fromkeys(r["molecule"] for r in summary):
        rows = [r for r in summary if r["molecule"] == mol]
        files += plot_energy(rows, folder / f"{mol}_energy")
        files += plot_error(rows, folder / f"{mol}_error", accuracy_mha)
        files += plot_convergence(rows, folder / f"{mol}_convergence", Path(results), accuracy_mha)
        mol_states = [r for r in states or [] if r["molecule"] == mol]
        files += plot_states(mol_states, folder / f"{mol}_states")
        files += plot_spectrum(mol_states, folder / f"{mol}_spectrum", spectrum_point)
    if summary:
        files += plot_resources(summary, folder / "resources")
    files += plot_shots_error(seeds or [], folder / "shots_error", accuracy_mha)
    files += device_figures(exports, Path(results), folder)
    return files
