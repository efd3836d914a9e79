"""Stage actions: read parent stage files, call the science, write the stage file.

One function per stage, each ``run_<stage>(node, inputs, output, progress=None)``. The Snakemake
scripts in ``workflow/scripts/`` only unpack ``snakemake.params``/``input``/``output`` and call
these, so every stage can be run and tested without Snakemake.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable
from pathlib import Path

import numpy as np

from .errors import StageFileError
from .plan import Node, molecule_kwargs
from .stage_table import STAGES
from .store import Timer, read_stage, write_stage

Progress = Callable[[str], None] | None


def _say(progress: Progress, msg: str) -> None:
    if progress is not None:
        progress(msg)


def _write(node: Node, output: str, **fields) -> None:
    """Write this node's stage file (stage, key, parameters and parents come from the node)."""
    write_stage(
        output, stage=node.stage, key=node.key, params=node.params, parents=node.parents, **fields
    )


def load_integrals(path: str | Path):
    """The :class:`~eigensweep.chem.IntegralsResult` stored in an integrals stage file."""
    from .chem import IntegralsResult

    sd = read_stage(path, stage="integrals")
    return IntegralsResult.from_store(sd.arrays, sd.meta)


def load_taper(path: str | Path):
    """The :class:`~eigensweep.qubit.SectorReduction` stored in a taper stage file."""
    from .qubit import SectorReduction

    sd = read_stage(path, stage="taper")
    return SectorReduction.from_store(sd.arrays, "taper/"), sd


def run_integrals(
    node: Node, inputs: dict[str, str], output: str, progress: Progress = None
) -> None:
    """SCF, active-space integrals and the classical reference ladder for one geometry point."""
    from .chem import compute_integrals
    from .chem.result import ARRAY_UNITS

    p = node.params
    guess, neighbour_orbsym = None, None
    if "guess" in inputs:
        prev = load_integrals(inputs["guess"])
        guess, neighbour_orbsym = (prev.mo_coeff, prev.mo_occ), prev.orbsym
    with Timer() as t:
        res = compute_integrals(
            **molecule_kwargs(p),
            symmetry=p["symmetry"],
            fci_max_determinants=p["fci_max_determinants"],
            nroots=p["nroots"],
            stability=p["stability"],
            guess=guess,
            label=f"integrals {node.key} ({p['atoms']})",
            neighbour_orbsym=neighbour_orbsym,
        )
    arrays, meta = res.to_store()
    _say(
        progress,
        f"integrals {node.key}: HF {res.references['hf']:.8f} Eh, exact {res.references['casci']:.8f} Eh",
    )
    _write(
        node,
        output,
        arrays=arrays,
        meta=meta,
        units=ARRAY_UNITS,
        wall_s=t.seconds,
    )


def sector_check(ham, ints, mapping: str, key: str, taper=None) -> dict:
    """The integrals' exact state checked in a mapped (and tapered) qubit problem
    (:func:`eigensweep.vqe.reference.check_qubit_problem`)."""
    from .vqe.reference import ExactReference, check_qubit_problem

    return check_qubit_problem(ham, ExactReference.from_integrals(ints), mapping, key, taper)


def run_hamiltonian(
    node: Node, inputs: dict[str, str], output: str, progress: Progress = None
) -> None:
    """Map the active-space Hamiltonian to qubits; number, S_z and S^2 operators; measurement
    costs."""
    from .qubit import (
        map_hamiltonian,
        number_operator,
        qwc_groups,
        reference_bits,
        shots_for_precision,
        spin_square_operator,
        sz_operator,
    )

    ints = load_integrals(inputs["integrals"])
    mapping = node.params["mapping"]
    with Timer() as t:
        ham = map_hamiltonian(ints.h1e, ints.eri, ints.e_core, mapping)
        n_qubits = ham.n_qubits
        num = number_operator(n_qubits, mapping)
        sz = sz_operator(n_qubits, mapping)
        s2 = spin_square_operator(n_qubits, mapping)
        ref = reference_bits(ints.nelec, ints.norb, mapping)
        groups = qwc_groups(ham)
        shots = shots_for_precision(ham, groups=groups)
        check = sector_check(ham, ints, mapping, node.key)
    arrays = {
        **ham.to_store("hamiltonian/"),
        **num.to_store("number/"),
        **sz.to_store("spin_z/"),
        **s2.to_store("spin_square/"),
        "reference_bits": np.asarray(ref, dtype=np.uint8),
    }
    meta = {
        "mapping": mapping,
        "n_qubits": n_qubits,
        "n_terms": ham.n_terms,
        "one_norm": float(ham.one_norm),
        "n_qwc_groups": len(groups),
        "shots_one_norm_bound": int(shots["shots_one_norm_bound"]),
        **check,
        "nelec": list(ints.nelec),
        "norb": ints.norb,
    }
    _say(progress, f"hamiltonian {node.key}: {mapping}, {n_qubits} qubits, {ham.n_terms} terms")
    units = {
        "hamiltonian/coeffs": "hartree",
        "spin_z/coeffs": "hbar",
        "spin_square/coeffs": "hbar^2",
    }
    _write(node, output, arrays=arrays, meta=meta, units=units, wall_s=t.seconds)


def run_taper(node: Node, inputs: dict[str, str], output: str, progress: Progress = None) -> None:
    """Z2 tapering (or the identity stage that records 'no tapering').

    Reads the Hamiltonian, reference bits and number / S_z / S^2 operators the hamiltonian
    stage stored; writes the (tapered) problem, the tapered number, S_z and S^2 operators
    (the excited-state methods' spin penalty and ``<S^2>``, ``<N>``), and the Z2
    generators with their sector (``z2/``, also when tapering is off) for later stages.
    """
    from .qubit import (
        PauliExpansion,
        diagonal_symmetries,
        identity_reduction,
        qwc_groups,
        reduce_to_sector,
        shots_for_precision,
    )
    from .qubit.statevector import basis_state

    sd = read_stage(inputs["hamiltonian"], stage="hamiltonian")
    ham = PauliExpansion.from_store(sd.arrays, "hamiltonian/")
    ref = sd.arrays["reference_bits"]
    with Timer() as t:
        if node.params["taper"]:
            res = reduce_to_sector(ham, ref)
            z2, z2_sector = res.generators, res.sector
        else:
            res = identity_reduction(ham, ref)
            z2, _, z2_sector = diagonal_symmetries(ham, ref)
        number = res.taper_operator(PauliExpansion.from_store(sd.arrays, "number/"))
        spin_z = res.taper_operator(PauliExpansion.from_store(sd.arrays, "spin_z/"))
        spin_square = res.taper_operator(PauliExpansion.from_store(sd.arrays, "spin_square/"))
        # measurement cost of the problem the optimizer and the device will see
        tham = res.hamiltonian
        groups = qwc_groups(tham)
        state = basis_state(res.reference_bits) if tham.n_qubits <= 22 else None
        shots = shots_for_precision(tham, groups=groups, state=state)
        check = sector_check(
            tham,
            load_integrals(inputs["integrals"]),
            sd.meta["mapping"],
            node.key,
            taper=res if node.params["taper"] else None,
        )
    arrays = {
        **res.to_store("taper/"),
        **number.to_store("number/"),
        **spin_z.to_store("spin_z/"),
        **spin_square.to_store("spin_square/"),
        **z2.to_store("z2/generators/"),
        "z2/sector": np.asarray(z2_sector, dtype=np.int8),
    }
    meta = {
        "mapping": sd.meta["mapping"],
        "nelec": sd.meta["nelec"],
        "norb": sd.meta["norb"],
        "tapered": bool(node.params["taper"]),
        "n_qubits_before": res.n_qubits_before,
        "n_qubits": res.hamiltonian.n_qubits,
        "n_terms": res.hamiltonian.n_terms,
        "sector": [int(v) for v in res.sector],
        "n_z2_symmetries": int(z2.n_terms),
        "one_norm": float(tham.one_norm_nonidentity),
        "n_qwc_groups": len(groups),
        "shots_one_norm_bound": int(shots["shots_one_norm_bound"]),
        **check,
        "shots_variance_at_reference": (
            int(shots["shots_variance"]) if shots.get("shots_variance") is not None else None
        ),
    }
    _say(progress, f"taper {node.key}: {res.n_qubits_before} -> {res.hamiltonian.n_qubits} qubits")
    units = {
        "taper/hamiltonian_coeffs": "hartree",
        "spin_z/coeffs": "hbar",
        "spin_square/coeffs": "hbar^2",
    }
    _write(node, output, arrays=arrays, meta=meta, units=units, wall_s=t.seconds)


def load_diagonal_symmetries(sd):
    """The Z2 generators (on the untapered qubits) and sector a taper stage file stores."""
    from .qubit import PauliExpansion

    gens = PauliExpansion.from_store(sd.arrays, "z2/generators/")
    return gens, np.asarray(sd.arrays["z2/sector"], dtype=np.int8)


def run_optimize(
    node: Node, inputs: dict[str, str], output: str, progress: Progress = None
) -> None:
    """Variational optimization of one ansatz x optimizer x estimator on one qubit problem.

    With an excited-state method (``states`` other than ``ground``) the ground state is the
    ``ground`` parent's stored result (this file repeats it at the top level) and the states
    go to ``states/*`` (:func:`_run_states`)."""
    from .vqe import run_optimize as optimize_kernel
    from .vqe.reference import ExactReference

    p = node.params
    if "ground" in inputs:
        _run_states(node, inputs, output, progress)
        return
    ints = load_integrals(inputs["integrals"])
    tap, tap_sd = load_taper(inputs["taper"])
    init = None
    if "warm" in inputs:
        prev = read_stage(inputs["warm"], stage="optimize")
        init = np.asarray(prev.arrays["params"], dtype=float)

    def report(i: int, energy: float) -> None:
        if progress is not None and (i < 5 or i % 25 == 0):
            progress(f"optimize {node.key}: evaluation {i}, energy {energy:.8f} Eh")

    with Timer() as t:
        res = optimize_kernel(
            h1e=ints.h1e,
            eri=ints.eri,
            e_core=ints.e_core,
            norb=ints.norb,
            nelec=tuple(ints.nelec),
            ansatz=p["ansatz"],
            optimizer=p["optimizer"],
            estimator=p["estimator"],
            qubit_hamiltonian=tap.hamiltonian,
            reference_bits=tap.reference_bits,
            mapping=tap_sd.meta["mapping"],
            tapering=tap,
            initial_params=init,
            seed=p["seed"],
            progress=report,
            exact=ExactReference.from_integrals(ints),
            dipole_parts=(ints.dipole_active, ints.dipole_core, ints.dipole_nuclear),
        )
    if not math.isfinite(res.energy):
        raise StageFileError(
            f"optimize {node.key}: the optimizer returned a non-finite energy; check the method options"
        )
    arrays, meta = res.to_store()
    meta = {
        **meta,
        "n_qubits_problem": tap.hamiltonian.n_qubits,
        "mapping": tap_sd.meta["mapping"],
        "tapered": tap_sd.meta["tapered"],
    }
    _say(
        progress,
        f"optimize {node.key}: E = {res.energy:.8f} Eh after {res.n_evaluations} evaluations",
    )
    _write(
        node,
        output,
        arrays=arrays,
        meta=meta,
        units={
            "trace_energy": "hartree",
            "trace_grad_norm": "hartree/radian",
            "params": "radian",
            "dipole": "e*bohr",
        },
        wall_s=t.seconds,
    )


#: ``states/*`` arrays of an optimize file with an excited-state method, and their units.
STATE_ARRAYS = {
    "energy": "hartree",
    "spin_square": "1",
    "n_electrons": "1",
    "dipole": "e*bohr",
    "transition_dipole": "e*bohr",
    "evaluations": "1",
}


def _run_states(node: Node, inputs: dict[str, str], output: str, progress: Progress) -> None:
    """Excited states on top of the ``ground`` parent's optimized ground state, in the
    taper parent's frame (its reduction, tapered number and S^2 operators)."""
    from .qubit import PauliExpansion
    from .vqe.engine import run_states

    p = node.params
    ints = load_integrals(inputs["integrals"])
    ground = read_stage(inputs["ground"], stage="optimize")
    tap, tap_sd = load_taper(inputs["taper"])
    operators = {
        name: PauliExpansion.from_store(tap_sd.arrays, f"{name}/")
        for name in ("number", "spin_square")
    }
    with Timer() as t:
        found = run_states(
            h1e=ints.h1e,
            eri=ints.eri,
            e_core=ints.e_core,
            norb=ints.norb,
            nelec=tuple(ints.nelec),
            ansatz=p["ansatz"],
            optimizer=p["optimizer"],
            states=p["states"],
            ground_params=ground.arrays["params"],
            seed=p["seed"],
            dipole_parts=(ints.dipole_active, ints.dipole_core, ints.dipole_nuclear),
            mapping=tap_sd.meta["mapping"],
            tapering=tap,
            operators=operators,
        )
    arrays = dict(ground.arrays)
    for name in STATE_ARRAYS:
        arrays[f"states/{name}"] = np.array([st[name] for st in found], dtype=float)
    width = max((len(st["natural_occupations"]) for st in found), default=0)
    arrays["states/natural_occupations"] = np.array(
        [
            np.pad(st["natural_occupations"], (0, width - len(st["natural_occupations"])))
            for st in found
        ]
    ).reshape(len(found), width)
    meta = {
        **ground.meta,
        "states_method": p["states"]["name"],
        "states_spin": p["states"]["spin"],
        "n_states_found": len(found),
        "states_params": [st["params"].tolist() for st in found],
    }
    _say(
        progress,
        f"optimize {node.key}: {p['states']['name']} "
        + ", ".join(f"{st['energy']:.6f}" for st in found)
        + " Eh",
    )
    units = {
        "trace_energy": "hartree",
        "trace_grad_norm": "hartree/radian",
        "params": "radian",
        "dipole": "e*bohr",
        **{f"states/{k}": u for k, u in STATE_ARRAYS.items()},
    }
    _write(node, output, arrays=arrays, meta=meta, units=units, wall_s=t.seconds)


def _export_problem(int_params: dict, opt_params: dict) -> dict:
    """What a device job computes, from its parents' stored parameters: geometry, basis,
    charge, multiplicity, active space and methods. Molecule names, scan points and config
    files are labels outside the content key (one job serves every sweep that shares it);
    ``results/device_summary.csv`` and ``eigensweep plan`` tie the job to them."""
    keys = ("atoms", "unit", "basis", "charge", "multiplicity", "frozen_core", "active")
    methods = {k: opt_params.get(k) for k in ("ansatz", "optimizer", "estimator")}
    est = methods["estimator"]
    if isinstance(est, dict) and isinstance(est.get("target"), dict):
        methods["estimator"] = {**est, "target": est["target"]["name"]}  # the file's name
    return {**{k: int_params.get(k) for k in keys}, **methods}


def export_target(param, key: str):
    """The export node's target: ``None`` for ``generic``, else a Target from its stored content."""
    from .target import GENERIC, target_from_dict

    if param == GENERIC:
        return None
    return target_from_dict(param, f"export {key}: target {param.get('name')}")


def run_export(node: Node, inputs: dict[str, str], output: str, progress: Progress = None) -> None:
    """Device jobs for one optimized point: OpenQASM 3/2 circuits, manifest and job summary."""
    from .device import build_job, state_circuit, write_job

    p = node.params
    opt = read_stage(inputs["optimize"], stage="optimize")
    tap, tap_sd = load_taper(inputs["taper"])
    mapping = tap_sd.meta["mapping"]
    ham = tap.hamiltonian
    target = export_target(p.get("target", "generic"), node.key)
    with Timer() as t:
        circ, e_circ = state_circuit(
            opt.meta["ansatz_meta"],
            opt.arrays["params"],
            mapping,
            ham,
            float(opt.meta["energy_exact_at_params"]),
        )
        job = build_job(
            circ,
            ham,
            shots_total=p["shots"],
            scale_factors=tuple(p["scale_factors"]),
            calibration=p["calibration"],
            job_name=f"eigensweep-{node.key}",
            meta={
                "export_key": node.key,
                "optimize_key": node.parents["optimize"],
                "mapping": mapping,
                "tapered": bool(tap_sd.meta["tapered"]),
                "energy_simulated": e_circ,
                "problem": _export_problem(read_stage(inputs["integrals"]).params, opt.params),
            },
            target_se=p["target_mha"] / 1000.0,
            target=target,
        )
        folder = Path(output).with_suffix("")
        write_job(job, folder)
    manifest = json.loads((folder / "manifest.json").read_text())
    meta = {
        "manifest": manifest,
        "energy_simulated": e_circ,
        "n_qubits": circ.n_qubits,
        "cnot_count": circ.cnot_count,
        "depth": circ.depth,
        "mapping": mapping,
        "tapered": bool(tap_sd.meta["tapered"]),
        "job_folder": folder.name,
        "target": manifest["target"]["name"],
    }
    _say(
        progress,
        f"export {node.key}: {len(manifest['circuits'])} circuits on {circ.n_qubits} qubits in {folder}",
    )
    _write(node, output, arrays={}, meta=meta, wall_s=t.seconds)


def run_reconcile(
    node: Node, inputs: dict[str, str], output: str, progress: Progress = None
) -> None:
    """Returned counts -> energies with bootstrap intervals: raw, mitigated, verified, extrapolated."""
    from .device import load_results, reconcile, run_synthetic_device, target_noise

    p = node.params
    exp = read_stage(inputs["export"], stage="export")
    manifest = exp.meta["manifest"]
    folder = Path(inputs["export"]).with_suffix("")
    tap, tap_sd = load_taper(inputs["taper"])
    ints = load_integrals(inputs["integrals"])
    with Timer() as t:
        if p["device"] == "synthetic" and p.get("noise") == "target":
            returned = run_synthetic_device(
                folder,
                seed=p["seed"],
                noise=target_noise(manifest),
                device=f"eigensweep synthetic device ({manifest['target']['name']} noise)",
            )
            counts = {cid: r["counts"] for cid, r in returned["results"].items()}
        elif p["device"] == "synthetic":
            returned = run_synthetic_device(
                folder,
                seed=p["seed"],
                readout_error=tuple(p["readout_error"]),
                depolarizing_1q=p["depolarizing_1q"],
                depolarizing_2q=p["depolarizing_2q"],
                device="eigensweep synthetic device",
            )
            counts = {cid: r["counts"] for cid, r in returned["results"].items()}
        else:
            counts = load_results(inputs["counts"], manifest)
        # the Z2 symmetries the taper stage stored: they verify an untapered job's counts; a
        # tapered job's were removed with their qubits (reconcile notes that and skips them)
        generators, sector = load_diagonal_symmetries(tap_sd)
        res = reconcile(
            manifest,
            counts,
            tap.hamiltonian,
            generators=generators,
            sector=sector,
            n_electrons=None,
            mapping=tap_sd.meta["mapping"],
            bootstrap=p["bootstrap"],
            seed=p["seed"],
            energy_sim=float(exp.meta["energy_simulated"]),
            energy_exact=float(ints.references["casci"]),
        )
    arrays, meta = res.to_store()
    meta = {**meta, "counts": counts, "comparison_table": res.comparison_table()}
    _say(progress, f"reconcile {node.key}: raw {res.raw.value:.6f} Eh")
    units = {k: "hartree" for k in arrays if k.startswith("samples/")}
    _write(node, output, arrays=arrays, meta=meta, units=units, wall_s=t.seconds)


#: stage name -> its action, as named in the stage table
STAGE_ACTIONS = {s.name: globals()[s.action] for s in STAGES}
