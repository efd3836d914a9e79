"""Per-job resource requests (``mem_mb``, ``runtime`` in minutes) grown from the problem size.

The planner does not run PySCF, so sizes are estimated from the molecule: spatial orbitals from
the basis and elements (minimal and split-valence counts per element; larger bases are scaled),
electrons from the elements and charge, or directly from the active space when one is given.
The determinant count C(norb, n_alpha) * C(norb, n_beta) drives the optimize stage's memory
(several CI vectors of 8-byte floats, plus PySCF's intermediates) and its runtime.
Estimates are deliberately generous; Snakemake doubles them on each retry (``attempt``).
"""

from __future__ import annotations

import math
import re

from .plan import Node, Plan

_Z = {
    "H": 1,
    "He": 2,
    "Li": 3,
    "Be": 4,
    "B": 5,
    "C": 6,
    "N": 7,
    "O": 8,
    "F": 9,
    "Ne": 10,
    "Na": 11,
    "Mg": 12,
    "Al": 13,
    "Si": 14,
    "P": 15,
    "S": 16,
    "Cl": 17,
    "Ar": 18,
}
# spatial basis functions per element row for common bases (H/He, Li-Ne, Na-Ar)
_NBF = {
    "sto-3g": (1, 5, 9),
    "sto-6g": (1, 5, 9),
    "6-31g": (2, 9, 13),
    "6-31g*": (2, 15, 19),
    "cc-pvdz": (5, 14, 18),
    "cc-pvtz": (14, 30, 34),
}


def estimate_size(params: dict) -> tuple[int, int, int]:
    """(norb, n_alpha, n_beta) of the active problem, estimated from integrals parameters."""
    elems = re.findall(r"(?:^|;)\s*([A-Z][a-z]?)", params["atoms"])
    n_el = sum(_Z.get(e, 10) for e in elems) - int(params["charge"])
    if params.get("active"):
        norb = int(params["active"]["orbitals"])
        n_el = int(params["active"]["electrons"])
    else:
        per = _NBF.get(params["basis"], (5, 14, 18))
        norb = sum(
            per[0] if _Z.get(e, 10) <= 2 else per[1] if _Z.get(e, 10) <= 10 else per[2]
            for e in elems
        )
    spin = int(params["multiplicity"]) - 1
    na = max(0, (n_el + spin) // 2)
    nb = max(0, n_el - na)
    return max(norb, 1), min(na, norb), min(nb, norb)


def stage_resources(node: Node, plan: Plan) -> dict[str, int]:
    """Memory (MB) and runtime (minutes) to request for one stage job."""
    int_params = _integrals_params(node, plan)
    norb, na, nb = estimate_size(int_params) if int_params else (4, 1, 1)
    dets = math.comb(norb, na) * math.comb(norb, nb)
    n_qubits = 2 * norb
    if node.stage == "integrals":
        return {
            "mem_mb": 1000 + min(64000, 8 * dets * 8 // 2**20 * 6),
            "runtime": 10 + dets // 200_000,
        }
    if node.stage in ("hamiltonian", "taper"):
        return {
            "mem_mb": 1000 + min(64000, (2**n_qubits) * 16 * 4 // 2**20),
            "runtime": 10 + n_qubits,
        }
    if node.stage == "optimize":
        mem = 1000 + min(120000, dets * 8 * 40 // 2**20)
        return {"mem_mb": mem, "runtime": 15 + dets // 20_000}
    return {"mem_mb": 2000, "runtime": 30}


def _integrals_params(node: Node, plan: Plan) -> dict | None:
    """The integrals parameters upstream of ``node`` (following parent keys)."""
    cur = node
    for _ in range(5):
        if cur.stage == "integrals":
            return cur.params
        parent = (
            cur.parents.get("integrals")
            or cur.parents.get("hamiltonian")
            or cur.parents.get("taper")
        )
        if parent is None or parent not in plan.nodes:
            return None
        cur = plan.nodes[parent]
    return None
