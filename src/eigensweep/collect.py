"""A study's tables: ``summary.csv``, ``device_summary.csv`` and the README of their columns.

Every study writes under its own folder ``results/<study>/`` (see :func:`study_folder`):
``summary.csv`` has one row per optimize job of every sub-sweep (column ``sweep``),
``device_summary.csv`` one row per reconciled estimate, ``README.md`` describes every column
(generated from :data:`SUMMARY_COLUMNS` and :data:`DEVICE_COLUMNS`, the one table of names,
units and meanings), and ``plots/`` holds the figures of :mod:`eigensweep.figures`.

Missing values (a reference rung that was skipped, an overlap that could not be formed) are
written as empty cells and the reason goes to the row's ``notes``; one missing value never stops
the summary from being written.  Floats carry 10 significant digits; lines end in LF.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from .store import StageData, atomic_path, read_stage
from .tables import Column, write_table

#: 1 hartree in kcal/mol (CODATA 2018: 627.509 474 063 1).
KCAL_MOL_PER_HARTREE = 627.5094740631

#: Numerical noise allowed below the exact energy before a result is flagged (hartree).
BELOW_EXACT_NOISE_EH = 1e-6


def _c(name: str, unit: str, description: str) -> Column:
    return Column(name, unit, description)


#: Reference ladder columns: name in the table -> key in the integrals stage file.
REFERENCE_COLUMNS = {
    "energy_hf_eh": "hf",
    "energy_mp2_eh": "mp2",
    "energy_ccsd_eh": "ccsd",
    "energy_ccsd_t_eh": "ccsd_t",
    "energy_exact_eh": "casci",
    "energy_fci_eh": "fci",
}

#: The summary's columns in order (scan columns ``scan_<variable>_<unit>`` follow ``point``).
SUMMARY_COLUMNS: list[Column] = [
    _c("molecule", "", "molecule name from the config"),
    _c("sweep", "", "sub-sweep name (`sweeps[].name`; `main` for a top-level `methods`)"),
    _c("point", "", "scan point label as used by `export.select`, e.g. `r=0.75`"),
    _c("basis", "", "Gaussian basis set"),
    _c("charge", "e", "total charge (elementary charges)"),
    _c("multiplicity", "", "spin multiplicity 2S+1"),
    _c("n_frozen", "", "doubly occupied orbitals kept out of the qubit problem (frozen core)"),
    _c("active_electrons", "", "electrons in the active space"),
    _c("active_orbitals", "", "spatial orbitals in the active space (2x = qubits untapered)"),
    _c("mapping", "", "fermion-to-qubit mapping"),
    _c("tapered", "", "Z2 tapering on (True) or off (False)"),
    _c("n_qubits", "", "qubits of the circuit that was optimized"),
    _c("n_terms", "", "Pauli terms of the (tapered) qubit Hamiltonian"),
    _c("n_qwc_groups", "", "qubit-wise commuting measurement groups (sorted insertion)"),
    _c("shots_one_norm_bound", "", "shots for 1.6 mHa standard error from the 1-norm bound"),
    _c("shots_variance_at_reference", "", "shots for 1.6 mHa at the reference state's variance"),
    _c("ansatz", "", "ansatz label (name and options that differ from defaults)"),
    _c("optimizer", "", "optimizer label"),
    _c("estimator", "", "energy estimator label"),
    _c(
        "states",
        "",
        "excited-state method label (`methods.states`); the row's energies and properties are "
        "those of its ground state (excited states: `states.csv`)",
    ),
    _c("seed", "", "base random seed of the run"),
    _c("n_params", "", "variational parameters"),
    _c("energy_eh", "Eh", "VQE energy as estimated (hartree)"),
    _c("energy_stderr_eh", "Eh", "standard error of `energy_eh` (0 for the exact estimator)"),
    _c(
        "energy_exact_at_params_eh",
        "Eh",
        "exact expectation value at the optimized parameters (no shot noise)",
    ),
    _c("energy_hf_eh", "Eh", "Hartree-Fock energy (RHF closed shell, ROHF open shell)"),
    _c("ladder_reference", "", "SCF reference of the MP2/CC rungs: RHF or ROHF"),
    _c("energy_mp2_eh", "Eh", "MP2 energy (on the HF reference above)"),
    _c("energy_ccsd_eh", "Eh", "CCSD energy (on the HF reference above)"),
    _c("energy_ccsd_t_eh", "Eh", "CCSD(T) energy (on the HF reference above)"),
    _c("energy_exact_eh", "Eh", "exact energy of the active space (CASCI; FCI without one)"),
    _c("energy_fci_eh", "Eh", "full-space FCI energy (empty when skipped; see `notes`)"),
    _c("error_mha", "mHa", "`energy_eh` minus `energy_exact_eh`, in millihartree"),
    _c("error_kcal_mol", "kcal/mol", "the same error in kcal/mol (CODATA 627.5095 per Eh)"),
    _c(
        "error_at_params_mha",
        "mHa",
        "`energy_exact_at_params_eh` minus `energy_exact_eh` (what the parameters reach)",
    ),
    _c(
        "below_exact",
        "",
        "True when `energy_eh` lies below the exact energy by more than 3 standard errors "
        "plus 1e-6 Eh (a variational violation, not shot noise)",
    ),
    _c(
        "below_exact_cause",
        "",
        "why a flagged energy lies below exact: another spin than requested, or unexplained",
    ),
    _c("overlap_exact", "", "|<psi|exact ground space>|^2 (empty when not formed; see `notes`)"),
    _c("n_electrons", "", "<N> of the optimized state"),
    _c("spin_square", "", "<S^2> of the optimized state"),
    _c("spin_mismatch", "", "True when <S^2> differs from S(S+1) of the requested multiplicity"),
    _c(
        "dipole_au",
        "e*bohr",
        "|dipole| of the optimized state: electronic part from its 1-RDM with the active-space "
        "dipole integrals, plus frozen-core and nuclear parts, about the origin of the "
        "molecule's frame (PySCF's standard orientation with symmetry)",
    ),
    _c("dipole_debye", "D", "the same in debye (1 e*bohr = 2.541746 D)"),
    _c("dipole_z_au", "e*bohr", "z component of the dipole (the molecular axis of a diatomic)"),
    _c("dipole_exact_au", "e*bohr", "|dipole| of the exact (CASCI) ground state, PySCF density"),
    _c("dipole_hf_au", "e*bohr", "|dipole| of the Hartree-Fock determinant"),
    _c(
        "natural_occupations",
        "",
        "natural-orbital occupation numbers of the optimized state (eigenvalues of its "
        "spin-summed active 1-RDM, descending, space-separated)",
    ),
    _c("cnot_count", "", "CNOT gates of the optimized circuit"),
    _c("depth", "", "circuit depth"),
    _c("evaluations", "", "energy evaluations used by the optimizer"),
    _c("n_iterations", "", "optimizer iterations"),
    _c(
        "shots_total",
        "",
        "shots of the whole optimize job: energies, gradients, calibration, restart selection "
        "and the final fresh estimate (0 for exact energies)",
    ),
    _c("converged", "", "the optimizer's own convergence criterion was met"),
    _c("stop_reason", "", "the optimizer's stop message"),
    _c("wall_s", "s", "wall time of the optimize job (seconds)"),
    _c("key", "", "optimize stage key: `results/optimize/<key>.h5`"),
    _c("notes", "", "why a value is missing, and other remarks on the row"),
]

#: Scan-column suffix by the scan variable's unit.
SCAN_SUFFIX = {"angstrom": "_angstrom", "bohr": "_bohr", "degree": "_deg", "none": ""}


def scan_column(var: str, unit: str) -> str:
    """Summary column of a scan variable, e.g. ``scan_r_angstrom`` or ``scan_a_deg``."""
    return f"scan_{var}{SCAN_SUFFIX.get(unit, '')}"


def _num(v) -> float:
    """Stored numbers use null (or nothing) for 'not available'; read them as nan."""
    if v is None or v == "":
        return float("nan")
    try:
        return float(v)
    except (TypeError, ValueError):
        return float("nan")


def _flag_below_exact(energy: float, stderr: float, exact: float) -> bool:
    """Below the exact energy beyond 3 standard errors plus numerical noise."""
    if not (math.isfinite(energy) and math.isfinite(exact)):
        return False
    margin = 3.0 * (stderr if math.isfinite(stderr) else 0.0) + BELOW_EXACT_NOISE_EH
    return energy < exact - margin


def _below_exact_cause(below: bool, m: dict) -> str:
    """Why an energy lies below the exact one: a state of another spin (the exact reference
    fixes S) or nothing known, which is a bug."""
    if not below:
        return ""
    if m.get("spin_mismatch"):
        return f"another spin: <S^2> = {_num(m.get('spin_square')):.4f}"
    return "unexplained: please report"


def _norm(v) -> float:
    v = np.asarray(v, dtype=float).reshape(-1)
    return float(np.linalg.norm(v)) if v.size == 3 and np.all(np.isfinite(v)) else math.nan


def _dipole_columns(opt_arrays: dict, int_arrays: dict) -> dict:
    """Ground-state property columns from the optimize and integrals stage files."""
    from .chem.properties import AU_TO_DEBYE

    dip = np.asarray(opt_arrays.get("dipole", np.full(3, np.nan)), dtype=float).reshape(-1)
    roots = np.asarray(int_arrays.get("exact_roots_dipole", np.zeros((0, 3))), dtype=float)
    noon = np.asarray(opt_arrays.get("natural_occupations", np.zeros(0)), dtype=float)
    return {
        "dipole_au": _norm(dip),
        "dipole_debye": _norm(dip) * AU_TO_DEBYE,
        "dipole_z_au": float(dip[2]) if dip.size == 3 else math.nan,
        "dipole_exact_au": _norm(roots[0]) if roots.size else math.nan,
        "dipole_hf_au": _norm(int_arrays.get("dipole_hf", np.full(3, np.nan))),
        "natural_occupations": " ".join(f"{x:.6f}" for x in noon),
    }


def summary_rows(rows: list[dict], results: str | Path = "results") -> list[dict]:
    """Summary rows for the plan's optimize jobs (reads optimize, taper and integrals files)."""
    results = Path(results)
    cache: dict[str, StageData] = {}

    def stage_data(stage: str, key: str) -> StageData:
        if key not in cache:
            cache[key] = read_stage(results / stage / f"{key}.h5", stage=stage)
        return cache[key]

    out = []
    for row in rows:
        int_sd = stage_data("integrals", row["key_integrals"])
        ints = int_sd.meta
        tap = stage_data("taper", row["key_taper"]).meta
        opt = read_stage(results / "optimize" / f"{row['key']}.h5", stage="optimize")
        m = opt.meta
        refs = {k: _num(v) for k, v in ints["references"].items()}
        notes = [
            f"{name}: {ints.get('reference_notes', {}).get(name, 'not computed')}"
            for col, name in REFERENCE_COLUMNS.items()
            if not math.isfinite(refs.get(name, math.nan))
        ]
        energy, stderr = _num(m.get("energy")), _num(m.get("energy_stderr", 0.0))
        at_params = _num(m.get("energy_exact_at_params"))
        exact = refs.get("casci", math.nan)
        overlap = _num(m.get("overlap_exact"))
        if not math.isfinite(overlap):
            notes.append("overlap_exact: not formed by the optimize stage")
        err = (energy - exact) * 1000.0
        below = _flag_below_exact(energy, stderr, exact)
        shots = opt.arrays.get("trace_shots")
        nelec = ints.get("nelec") or [math.nan]
        r = {
            "molecule": row["molecule"],
            "sweep": row.get("sweep", "main"),
            "point": row["point"],
            **{
                scan_column(k[5:], row.get("axis_units", {}).get(k[5:], "none")): v
                for k, v in row.items()
                if k.startswith("scan_")
            },
            **{k: row.get(k, "") for k in ("basis", "charge", "multiplicity", "mapping")},
            "tapered": row["tapered"],
            "n_frozen": ints.get("n_frozen", ""),
            "active_electrons": int(sum(nelec)) if all(map(math.isfinite, nelec)) else "",
            "active_orbitals": ints.get("norb", ""),
            "n_qubits": m["n_qubits"],
            "n_terms": tap.get("n_terms", ""),
            "n_qwc_groups": tap.get("n_qwc_groups", ""),
            "shots_one_norm_bound": tap.get("shots_one_norm_bound", ""),
            "shots_variance_at_reference": tap.get("shots_variance_at_reference") or "",
            **{k: row.get(k, "") for k in ("ansatz", "optimizer", "estimator", "states", "seed")},
            "n_params": m["n_params"],
            "energy_eh": energy,
            "energy_stderr_eh": stderr,
            "energy_exact_at_params_eh": at_params,
            **{col: refs.get(name, math.nan) for col, name in REFERENCE_COLUMNS.items()},
            "error_mha": err,
            "error_kcal_mol": err / 1000.0 * KCAL_MOL_PER_HARTREE,
            "error_at_params_mha": (at_params - exact) * 1000.0,
            "below_exact": below,
            "below_exact_cause": _below_exact_cause(below, m),
            "ladder_reference": ints.get("scf_method", ""),
            "overlap_exact": overlap,
            "n_electrons": _num(m.get("n_electrons")),
            "spin_square": _num(m.get("spin_square")),
            "spin_mismatch": m.get("spin_mismatch", ""),
            **_dipole_columns(opt.arrays, int_sd.arrays),
            "cnot_count": m.get("cnot_count", ""),
            "depth": m.get("depth", ""),
            "evaluations": m.get("n_evaluations", ""),
            "n_iterations": m.get("n_iterations", ""),
            "shots_total": int(m["shots_total"])
            if "shots_total" in m
            else (int(np.sum(shots)) if shots is not None else ""),
            "converged": m.get("converged", ""),
            "stop_reason": " ".join(str(m.get("stop_reason") or m.get("message", "")).split()),
            "wall_s": _num(opt.attrs.get("wall_s")),
            "key": row["key"],
            "notes": "; ".join(notes),
            # internal (not written): what curve analysis and figures need
            "_atoms": int_sd.params.get("atoms", ""),
            "_length_unit": int_sd.params.get("unit", "angstrom"),
            "_scan_units": dict(row.get("axis_units", {})),
        }
        scans = [k for k in r if k.startswith("scan_")]
        if len(scans) == 1:
            r["_scan_var"] = next(k[5:] for k in row if k.startswith("scan_"))
            r["_scan_unit"] = r["_scan_units"].get(r["_scan_var"], "none")
        out.append(r)
    return out


#: What identifies one (problem, method) cell of the seed axis in ``seeds.csv``.
SEED_GROUP_KEYS = (
    "molecule",
    "sweep",
    "point",
    "mapping",
    "tapered",
    "ansatz",
    "optimizer",
    "estimator",
)

#: ``seeds.csv``: one row per (molecule, sweep, point, methods), aggregated over seeds.
SEED_COLUMNS: list[Column] = [
    *[c for c in SUMMARY_COLUMNS if c.name in SEED_GROUP_KEYS],
    _c("n_seeds", "", "optimize jobs (seeds) aggregated in this row"),
    _c("seeds", "", "the seeds, space-separated"),
    _c("error_median_mha", "mHa", "median over seeds of E(VQE) - E(exact), the reported energy"),
    _c("error_q25_mha", "mHa", "25th percentile over seeds of the error"),
    _c("error_q75_mha", "mHa", "75th percentile over seeds of the error"),
    _c("abs_error_median_mha", "mHa", "median over seeds of |E(VQE) - E(exact)|"),
    _c(
        "error_at_params_median_mha",
        "mHa",
        "median over seeds of the exact energy at the optimized parameters minus E(exact) "
        "(the state's own error, free of the final estimate's shot noise)",
    ),
    _c("error_at_params_q25_mha", "mHa", "25th percentile of the state's error"),
    _c("error_at_params_q75_mha", "mHa", "75th percentile of the state's error"),
    _c(
        "within_accuracy", "", "fraction of seeds with |E(VQE) - E(exact)| within the accuracy band"
    ),
    _c("shots_total_median", "", "median over seeds of the job's total shots"),
    _c("shots_total_min", "", "fewest total shots of one seed"),
    _c("shots_total_max", "", "most total shots of one seed"),
]


def _median_q(values: list[float]) -> tuple[float, float, float]:
    v = np.array([x for x in values if math.isfinite(x)], dtype=float)
    if v.size == 0:
        return math.nan, math.nan, math.nan
    q25, q50, q75 = np.percentile(v, [25, 50, 75])
    return float(q50), float(q25), float(q75)


def seed_rows(summary: list[dict], accuracy_mha: float = 1.6) -> list[dict]:
    """``seeds.csv`` rows: the summary grouped by :data:`SEED_GROUP_KEYS`, median and
    quartiles over seeds (first-appearance order)."""
    groups: dict[tuple, list[dict]] = {}
    for r in summary:
        groups.setdefault(tuple(str(r.get(k, "")) for k in SEED_GROUP_KEYS), []).append(r)
    out = []
    for members in groups.values():
        err = [_num(r.get("error_mha")) for r in members]
        at = [_num(r.get("error_at_params_mha")) for r in members]
        shots = [float(r["shots_total"]) for r in members if r.get("shots_total") != ""]
        e50, e25, e75 = _median_q(err)
        a50, a25, a75 = _median_q(at)
        finite = [abs(e) for e in err if math.isfinite(e)]
        row = {k: members[0].get(k, "") for k in SEED_GROUP_KEYS}
        row.update(
            n_seeds=len(members),
            seeds=" ".join(str(r.get("seed", "")) for r in members),
            error_median_mha=e50,
            error_q25_mha=e25,
            error_q75_mha=e75,
            abs_error_median_mha=float(np.median(finite)) if finite else math.nan,
            error_at_params_median_mha=a50,
            error_at_params_q25_mha=a25,
            error_at_params_q75_mha=a75,
            within_accuracy=(
                sum(1 for e in finite if e <= accuracy_mha) / len(finite) if finite else math.nan
            ),
            shots_total_median=int(np.median(shots)) if shots else "",
            shots_total_min=int(min(shots)) if shots else "",
            shots_total_max=int(max(shots)) if shots else "",
        )
        out.append(row)
    return out


#: ``states.csv``: one row per optimize job and state (state 0 = ground).
STATE_COLUMNS: list[Column] = [
    *[
        c
        for c in SUMMARY_COLUMNS
        if c.name
        in (
            "molecule",
            "sweep",
            "point",
            "basis",
            "mapping",
            "tapered",
            "ansatz",
            "optimizer",
            "estimator",
            "states",
        )
    ],
    _c("state", "", "state index, 0 = ground, ascending energy"),
    _c("spin", "", "`requested` (states of the molecule's multiplicity) or `all` (S_z sector)"),
    _c("energy_eh", "Eh", "the state's energy <H> (spin penalty not included)"),
    _c(
        "energy_exact_eh",
        "Eh",
        "the matching exact root: k-th CASCI root of the requested spin (spin `all`: of the "
        "whole S_z sector), stored by the integrals stage",
    ),
    _c("error_mha", "mHa", "`energy_eh` minus `energy_exact_eh`"),
    _c(
        "below_exact",
        "",
        "True when `energy_eh` lies below its exact root by more than 1e-6 Eh",
    ),
    _c("s2", "", "<S^2> of the state"),
    _c("s2_exact", "", "<S^2> of the matching exact root"),
    _c("n_electrons", "", "<N> of the state"),
    _c("dipole_au", "e*bohr", "|dipole| of the state (1-RDM, core and nuclear parts)"),
    _c("dipole_exact_au", "e*bohr", "|dipole| of the matching exact root (PySCF density)"),
    _c("excitation_energy_eh", "Eh", "`energy_eh` minus the energy of state 0 of this method"),
    _c(
        "transition_dipole_au",
        "e*bohr",
        "|<0|mu|k>| from state 0 (VQD/SSVQE: transition density of the two states; qEOM: "
        "its commutator amplitude)",
    ),
    _c("transition_dipole_exact_au", "e*bohr", "|<0|mu|k>| of the exact roots (PySCF)"),
    _c("oscillator_strength", "", "f = (2/3) dE |<0|mu|k>|^2 (atomic units)"),
    _c("oscillator_strength_exact", "", "f of the exact roots"),
    _c("natural_occupations", "", "natural-orbital occupations of the state, descending"),
    _c("key", "", "optimize stage key: `results/optimize/<key>.h5`"),
    _c("notes", "", "remarks, e.g. lower states of another spin left out by spin `requested`"),
]


def _scan_columns(row: dict) -> dict:
    """Scan columns of a plan row as the tables name them, plus the figures' axis hints."""
    units = row.get("axis_units", {})
    out = {
        scan_column(k[5:], units.get(k[5:], "none")): v
        for k, v in row.items()
        if k.startswith("scan_")
    }
    scans = [k[5:] for k in row if k.startswith("scan_")]
    if len(scans) == 1:
        out["_scan_var"], out["_scan_unit"] = scans[0], units.get(scans[0], "none")
    return out


def _exact_roots(int_arrays: dict, spin: str) -> tuple[np.ndarray, ...]:
    name = "exact_sz_roots" if spin == "all" else "exact_roots"
    get = lambda suffix, shape: np.asarray(  # noqa: E731
        int_arrays.get(name + suffix, np.zeros(shape)), dtype=float
    )
    return (
        get("", 0),
        get("_spin_square", 0),
        get("_dipole", (0, 3)),
        get("_transition_dipole", (0, 3)),
    )


def _other_spin_note(int_arrays: dict, spin: str, energy_exact: float, s2_exact: float) -> str:
    """With spin `requested`: states of another spin below this root in the S_z sector."""
    if spin == "all" or not math.isfinite(energy_exact):
        return ""
    e_sz, s2_sz, _, _ = _exact_roots(int_arrays, "all")
    lower = [
        (e, s)
        for e, s in zip(e_sz, s2_sz, strict=True)
        if e < energy_exact - 1e-8 and abs(s - s2_exact) > 1e-3
    ]
    if not lower:
        return ""
    shown = ", ".join(f"<S^2>={s:.2f} at {e:.6f} Eh" for e, s in lower[:3])
    return (
        f"spin requested: the S_z sector holds lower states of another spin ({shown}); "
        "methods.states spin: all reports them"
    )


def state_rows(rows: list[dict], results: str | Path = "results") -> list[dict]:
    """``states.csv`` rows: every state of every optimize job (ground jobs give state 0)."""
    from .chem.properties import oscillator_strength

    results = Path(results)
    out = []
    for row in rows:
        ints = read_stage(results / "integrals" / f"{row['key_integrals']}.h5", stage="integrals")
        opt = read_stage(results / "optimize" / f"{row['key']}.h5", stage="optimize")
        a = opt.arrays
        spin = opt.meta.get("states_spin", "requested")
        if "states/energy" in a:
            energies = np.asarray(a["states/energy"], float)
            s2 = np.asarray(a["states/spin_square"], float)
            n_el = np.asarray(a["states/n_electrons"], float)
            dip = np.asarray(a["states/dipole"], float).reshape(-1, 3)
            tdm = np.asarray(a["states/transition_dipole"], float).reshape(-1, 3)
            noon = np.asarray(a["states/natural_occupations"], float).reshape(len(energies), -1)
        else:
            energies = np.array([_num(opt.meta.get("energy"))])
            s2 = np.array([_num(opt.meta.get("spin_square"))])
            n_el = np.array([_num(opt.meta.get("n_electrons"))])
            dip = np.asarray(a.get("dipole", np.full(3, np.nan)), float).reshape(1, 3)
            tdm = np.zeros((1, 3))
            noon = np.asarray(a.get("natural_occupations", np.zeros(0)), float).reshape(1, -1)
        e_ex, s2_ex, dip_ex, tdm_ex = _exact_roots(ints.arrays, spin)
        sector_note = ""
        if (
            "states/energy" in a
            and opt.meta.get("tapered")
            and opt.meta.get("n_qubits", 0) < 2 * int(ints.meta.get("norb", 0))
        ):
            # tapered: only the states of the reference's symmetry sector are reachable, so
            # they are compared with the stored roots of that symmetry
            name = "exact_sz_roots" if spin == "all" else "exact_roots"
            weight = np.asarray(ints.arrays[f"{name}_symmetry_weight"], float)
            keep = np.flatnonzero(weight > 0.5)
            e_ex, s2_ex, dip_ex, tdm_ex = e_ex[keep], s2_ex[keep], dip_ex[keep], tdm_ex[keep]
            sector_note = (
                "tapered: states of the reference's symmetry sector only, compared with the "
                "exact roots of that symmetry"
                + ("" if len(keep) >= len(energies) else "; raise references.nroots for more")
            )
        for k, e in enumerate(energies):
            has = k < len(e_ex)
            ex = float(e_ex[k]) if has else math.nan
            de, de_ex = e - energies[0], (ex - e_ex[0]) if has else math.nan
            out.append(
                {
                    **{c.name: row.get(c.name, "") for c in STATE_COLUMNS[:10]},
                    "sweep": row.get("sweep", "main"),
                    "state": k,
                    "spin": spin,
                    "energy_eh": float(e),
                    "energy_exact_eh": ex,
                    "error_mha": (e - ex) * 1000.0,
                    "below_exact": _flag_below_exact(float(e), 0.0, ex),
                    "s2": float(s2[k]),
                    "s2_exact": float(s2_ex[k]) if has else math.nan,
                    "n_electrons": float(n_el[k]),
                    "dipole_au": _norm(dip[k]),
                    "dipole_exact_au": _norm(dip_ex[k]) if has else math.nan,
                    "excitation_energy_eh": de,
                    "transition_dipole_au": _norm(tdm[k]) if k else 0.0,
                    "transition_dipole_exact_au": _norm(tdm_ex[k]) if has and k else 0.0,
                    "oscillator_strength": oscillator_strength(de, tdm[k]) if k else 0.0,
                    "oscillator_strength_exact": (
                        oscillator_strength(de_ex, tdm_ex[k]) if has and k else 0.0
                    ),
                    "natural_occupations": " ".join(f"{x:.6f}" for x in noon[k]),
                    "key": row["key"],
                    "notes": (sector_note if k else "")
                    or _other_spin_note(ints.arrays, spin, ex, float(s2_ex[k]) if has else 0.0),
                    **_scan_columns(row),
                    "converged": opt.meta.get("converged", ""),  # figures ring the others
                }
            )
    return out


def write_summary(rows: list[dict], path: str | Path) -> Path:
    """Write the summary CSV atomically."""
    return write_table(rows, path, SUMMARY_COLUMNS)


def column_units(table: list[Column] | None = None) -> dict[str, str]:
    """Unit of every column of the summary (and device) tables, scan columns by suffix."""
    out = {c.name: c.unit for c in (table or SUMMARY_COLUMNS + DEVICE_COLUMNS)}
    return out


def readme_text(study: str) -> str:
    """The study folder's README: what each file holds and every column's unit and meaning."""
    lines = [
        f"# Study `{study}`",
        "",
        "Generated by `eigensweep` (collect stage); do not edit. Stage files are shared in",
        "`results/<stage>/<key>.h5`; this folder holds only this study's tables and figures.",
        "",
        "- `summary.csv`: one row per optimize job of every sub-sweep.",
        "- `device_summary.csv`: one row per reconciled device estimate.",
        "- `analysis.csv`: fitted curve properties per molecule and method (see below).",
        "- `seeds.csv`: median and spread over seeds per molecule, point and methods.",
        "- `states.csv`: one row per optimize job and state (excited-state methods).",
        "- `plots/`: figures as PDF and PNG (300 dpi).",
        "",
        "Empty cells are missing values; the row's `notes` says why. Scan columns are",
        "`scan_<variable>_<unit>` (`_angstrom`, `_bohr`, `_deg`).",
        "Exported rows carry the cost estimate of each device target they were compiled for",
        "(`export.targets`) as `target_<name>_<metric>` columns ('-' in the name becomes '_');",
        "these are estimates from a simple model, not guarantees:",
        "",
        "| metric | unit | meaning |",
        "|---|---|---|",
        *[f"| `{c.name}` | {c.unit} | {c.description} |" for c in TARGET_COST_METRICS],
        "",
    ]
    from .analysis import ANALYSIS_COLUMNS

    for title, table in (
        ("summary.csv", SUMMARY_COLUMNS),
        ("device_summary.csv", DEVICE_COLUMNS),
        ("analysis.csv", ANALYSIS_COLUMNS),
        ("seeds.csv", SEED_COLUMNS),
        ("states.csv", STATE_COLUMNS),
    ):
        lines += [f"## {title}", "", "| column | unit | meaning |", "|---|---|---|"]
        lines += [f"| `{c.name}` | {c.unit} | {c.description} |" for c in table]
        lines.append("")
    return "\n".join(lines)


def study_folder(results: str | Path, study: str) -> Path:
    """Where a study's tables and figures go: ``results/<study>/``."""
    return Path(results) / study


def collect(
    rows: list[dict],
    results: str | Path = "results",
    accuracy_mha: float = 1.6,
    exports: list[dict] | None = None,
    study: str = "main",
    spectrum_point: int | str = 0,
) -> list[Path]:
    """Write the study's tables, README and figures; returns the written files
    (``spectrum_point``: the config's ``collect.spectrum_point``).

    The summary is written before any figure, so a plotting problem never loses it.
    """
    from .analysis import analyse_study, write_analysis
    from .figures import study_figures

    results = Path(results)
    folder = study_folder(results, study)
    summary = summary_rows(rows, results)
    add_target_costs(summary, exports or [], results)
    devices = device_rows(exports or [], results)
    files = [
        write_summary(summary, folder / "summary.csv"),
        write_table(devices, folder / "device_summary.csv", DEVICE_COLUMNS),
    ]
    analysis, warnings = analyse_study(summary)
    files.append(write_analysis(analysis, folder / "analysis.csv"))
    files.append(write_table(seed_rows(summary, accuracy_mha), folder / "seeds.csv", SEED_COLUMNS))
    states = state_rows(rows, results)
    files.append(write_table(states, folder / "states.csv", STATE_COLUMNS))
    readme = folder / "README.md"
    with atomic_path(readme) as tmp:
        tmp.write_text(readme_text(study), encoding="utf-8", newline="\n")
    files.append(readme)
    for w in warnings:
        print(f"eigensweep: collect: {w}")
    files += study_figures(
        summary,
        exports or [],
        results,
        folder / "plots",
        accuracy_mha,
        seeds=seed_rows(summary, accuracy_mha),
        states=states,
        spectrum_point=spectrum_point,
    )
    return files


DEVICE_COLUMNS: list[Column] = [
    _c("molecule", "", "molecule name"),
    _c("point", "", "scan point label"),
    _c("mapping", "", "fermion-to-qubit mapping"),
    _c("tapered", "", "Z2 tapering on or off"),
    _c("ansatz", "", "ansatz label"),
    _c("optimizer", "", "optimizer label"),
    _c("target", "", "device target the job was compiled for (`export.targets`)"),
    _c("n_qubits", "", "qubits of the exported circuits"),
    _c("n_circuits", "", "circuits in the device job (measurement, calibration, folded)"),
    _c("shots", "", "shots over all circuits of the job"),
    _c("energy_simulated_eh", "Eh", "noise-free expectation of the exported circuit"),
    _c("energy_exact_eh", "Eh", "exact energy of the active space"),
    _c(
        "estimate",
        "",
        "raw, readout_mitigated, symmetry_verified, zne_linear, zne_richardson (not with two "
        "noise-scale factors, where it is the linear fit)",
    ),
    _c("energy_eh", "Eh", "the estimate's energy"),
    _c("ci_low_eh", "Eh", "lower end of the bootstrap 95 % interval"),
    _c("ci_high_eh", "Eh", "upper end of the bootstrap 95 % interval"),
    _c("error_mha", "mHa", "`energy_eh` minus `energy_exact_eh`"),
    _c("kept_fraction", "", "shots kept by symmetry verification"),
    _c("key_export", "", "export stage key"),
    _c("key_reconcile", "", "reconcile stage key"),
]


#: Per-target cost columns of the summary: ``target_<name>_<metric>`` (``-`` in the name
#: becomes ``_``), from the export stage's estimate (``manifest.json`` ``cost``).
TARGET_COST_METRICS: list[Column] = [
    _c("two_qubit_count", "", "native two-qubit gates of the routed state preparation"),
    _c("depth", "", "its depth in native gates (every gate one layer)"),
    _c("duration_us", "us", "its estimated duration: critical path of the gate durations"),
    _c(
        "fidelity",
        "",
        "estimated circuit fidelity: product of gate fidelities times idle decay "
        "exp(-t_idle/T1 - t_idle/T_phi) per used qubit times the readout assignment fidelity "
        "1 - (p01 + p10)/2 per measured qubit (an estimate, not a guarantee)",
    ),
    _c("shots", "", "shots for `export.target_mha` from the group variances at the ideal state"),
    _c("shots_noisy", "", "the same divided by the estimated fidelity squared (rule of thumb)"),
]


def target_cost_column(target: str, metric: str) -> str:
    """Summary column of one target's cost metric, e.g. ``target_chain12_demo_fidelity``."""
    return f"target_{target.replace('-', '_')}_{metric}"


def add_target_costs(summary: list[dict], exports: list[dict], results: str | Path) -> None:
    """Add each exported row's per-target cost estimate (read from its export stage file)."""
    by_key = {r["key"]: r for r in summary}
    for ex in exports:
        row = by_key.get(ex["key"])
        f = Path(results) / "export" / f"{ex['key_export']}.h5"
        if row is None or not f.is_file():
            continue
        cost = read_stage(f, stage="export").meta["manifest"].get("cost") or {}
        name = ex.get("target", cost.get("target", "generic"))
        values = {
            "two_qubit_count": cost.get("two_qubit_count"),
            "depth": cost.get("depth"),
            "duration_us": _num(cost.get("duration_ns")) / 1000.0,
            "fidelity": _num(cost.get("fidelity")),
            "shots": cost.get("shots_for_target"),
            "shots_noisy": cost.get("shots_for_target_noisy"),
        }
        for metric, v in values.items():
            row[target_cost_column(name, metric)] = "" if v is None else v


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
        exact = _num(rec.meta.get("energy_exact"))
        for kind, est in res.estimates().items():
            if est is None:
                continue
            out.append(
                {
                    **{
                        k: ex.get(k, "")
                        for k in ("molecule", "point", "mapping", "tapered", "ansatz", "optimizer")
                    },
                    "target": ex.get("target", manifest.get("target", {}).get("name", "")),
                    "n_qubits": exp.meta["n_qubits"],
                    "n_circuits": len(manifest["circuits"]),
                    "shots": sum(int(c["shots"]) for c in manifest["circuits"]),
                    "energy_simulated_eh": _num(exp.meta.get("energy_simulated")),
                    "energy_exact_eh": exact,
                    "estimate": kind,
                    "energy_eh": est.value,
                    "ci_low_eh": est.ci_low,
                    "ci_high_eh": est.ci_high,
                    "error_mha": (est.value - exact) * 1000.0,
                    "kept_fraction": res.kept_fraction if kind == "symmetry_verified" else "",
                    "key_export": ex["key_export"],
                    "key_reconcile": ex["key_reconcile"],
                }
            )
    return out
