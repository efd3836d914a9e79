"""Per-job resource requests (``mem_mb``, ``runtime`` in minutes) grown from the problem size.

The planner does not run PySCF, so sizes are estimated from the molecule: spatial orbitals from
the basis and elements (minimal and split-valence counts per element; larger bases are scaled),
electrons from the elements and charge, or directly from the active space when one is given.
The determinant count C(norb, n_alpha) * C(norb, n_beta) drives the optimize stage's memory
(:func:`eigensweep.vqe.detsize.detspace_memory_mb`: CI vectors of 8-byte floats for the
emulation and the exact reference) and its runtime.
Estimates are deliberately generous; Snakemake doubles them on each retry (``attempt``).
"""

from __future__ import annotations

import math
import re

from .plan import Node, Plan
from .vqe.detsize import detspace_memory_mb_of

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
    dets = _determinants(norb, na, nb)
    n_qubits = 2 * norb
    if node.stage == "integrals":
        return {
            "mem_mb": 1000 + int(min(64000, 8 * dets * 8 // 2**20 * 6)),
            "runtime": int(min(MAX_RUNTIME_MIN, 10 + dets // 200_000)),
        }
    if node.stage in ("hamiltonian", "taper"):
        return {
            "mem_mb": 1000 + int(min(64000, 2.0 ** min(n_qubits, 1000) * 16 * 4 // 2**20)),
            "runtime": int(min(MAX_RUNTIME_MIN, 10 + n_qubits)),
        }
    if node.stage == "optimize":
        size = optimize_size(node, plan)
        return {
            "mem_mb": 1000 + int(min(120000, size["mem_mb"])),
            "runtime": int(min(MAX_RUNTIME_MIN, size["runtime_min"])),
        }
    return {"mem_mb": 2000, "runtime": 30}


#: Longest runtime (minutes) ever requested from a scheduler (7 days); a larger estimate means
#: the problem is out of reach, which the size gate (:func:`check_limits`) reports.
MAX_RUNTIME_MIN = 7 * 24 * 60

_FERMIONIC = ("uccsd", "kupccgsd")


def optimize_size(node: Node, plan: Plan) -> dict:
    """What one optimize job needs, estimated from the plan alone (no chemistry run).

    Returns ``n_qubits`` (2 x active orbitals, before tapering), ``determinants``
    (C(norb, n_alpha) C(norb, n_beta), the exact reference and determinant-space emulation),
    ``simulator`` (``"determinant space"`` for fermionic ansätze, untapered, exact estimator;
    else ``"statevector"``, with ``statevector_qubits``: the mapped qubits, two fewer when
    tapered, as the two spin-parity symmetries always taper), ``mem_mb``
    (:func:`eigensweep.vqe.detsize.detspace_memory_mb_of`, plus 16-byte amplitudes x 8 for a
    statevector) and ``runtime_min`` (a rough scale).
    """
    norb, na, nb = estimate_size(_integrals_params(node, plan) or {})
    dets = _determinants(norb, na, nb)
    n_qubits = 2 * norb
    ansatz, estimator = node.params["ansatz"], node.params["estimator"]
    taper_node = plan.nodes.get(node.parents.get("taper", ""))
    tapered = bool(taper_node and taper_node.params.get("taper"))
    fermionic = ansatz["name"] in _FERMIONIC or (
        ansatz["name"] == "adapt" and ansatz.get("pool") != "qubit"
    )
    det_only = fermionic and not tapered and estimator["name"] == "exact"
    sv_qubits = 0 if det_only else max(1, n_qubits - (2 if tapered else 0))
    amplitudes = 2.0 ** min(sv_qubits, 1000) if sv_qubits else 0.0
    # CI vectors: eigensweep.vqe.detsize (emulation and the exact reference, as the stage runs)
    mem = detspace_memory_mb_of(dets) * 2**20 + amplitudes * 16 * 8
    runtime = 15 + float(dets) / 20_000 + amplitudes / 2**18
    return {
        "n_qubits": n_qubits,
        "determinants": dets,
        "simulator": "determinant space" if det_only else "statevector",
        "statevector_qubits": sv_qubits,
        "mem_mb": _int_if_small(mem / 2**20),
        "runtime_min": _int_if_small(runtime),
    }


def _determinants(norb: int, na: int, nb: int) -> int | float:
    """C(norb, na) C(norb, nb): exact below 10^15, else a float (inf beyond 1e308)."""
    log10 = sum(
        (math.lgamma(norb + 1) - math.lgamma(k + 1) - math.lgamma(norb - k + 1)) / math.log(10)
        for k in (na, nb)
    )
    if log10 < 15:
        return math.comb(norb, na) * math.comb(norb, nb)
    return math.inf if log10 > 308 else 10.0**log10


def _int_if_small(x: float) -> int | float:
    return int(x) if x < 1e15 else x


def approx(n: int | float) -> str:
    """A count for messages: exact below a million, else ``d.dde+NN`` (``inf`` if unbounded)."""
    if n < 1e6:
        return str(int(n))
    return "inf" if math.isinf(n) else f"{n:.2e}"


def check_limits(plan: Plan, limits: dict) -> list[str]:
    """Problems of the plan above the config's ``limits`` (one line each, first per problem).

    ``limits`` is the validated ``limits`` section: ``qubits``, ``statevector_qubits``,
    ``determinants``, ``memory_mb``, ``stage_jobs``.
    """
    out: list[str] = []
    if len(plan.nodes) > limits["stage_jobs"]:
        out.append(
            f"the sweep has {len(plan.nodes)} stage jobs, above limits.stage_jobs "
            f"({limits['stage_jobs']}); split it or scan fewer points"
        )
    seen: set[tuple] = set()
    for row in plan.rows:
        size = optimize_size(plan.nodes[row["key"]], plan)
        what = f"molecule {row['molecule']} point {row['point']}"
        checks = (
            ("qubits", size["n_qubits"], f"{size['n_qubits']} qubits"),
            ("determinants", size["determinants"], f"{approx(size['determinants'])} determinants"),
            (
                "statevector_qubits",
                size["statevector_qubits"],
                f"a {size['statevector_qubits']}-qubit statevector ({row['ansatz']}, "
                f"{row['estimator']}{', tapered' if row['tapered'] else ''})",
            ),
            (
                "memory_mb",
                size["mem_mb"],
                f"about {approx(size['mem_mb'])} MB for one optimize job",
            ),
        )
        for limit, value, text in checks:
            tag = (row["key_integrals"], limit, text)
            if value > limits[limit] and tag not in seen:
                seen.add(tag)
                out.append(
                    f"{what}: {text}, above limits.{limit} ({limits[limit]}); choose a smaller "
                    "active space (molecules[].active) or basis"
                )
    return out


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


# ---------------------------------------------------------------- batches of scheduler jobs
#: Seconds a stage job takes on top of its science when it runs inside a scheduler job: the
#: Slurm plugin starts each stage job of a group as its own `srun` step (a Snakemake process
#: that parses the Snakefile and imports the stage's libraries). Measured on the one-node test
#: cluster for H2/STO-3G chains (tests/cluster/run-slurm-test.sh): about 5 s per stage job.
STEP_OVERHEAD_S = 5.0
#: Seconds one scheduler job spends before its first stage job (Snakemake start and DAG).
BATCH_START_S = 20.0


def expected_seconds(node: Node, plan: Plan) -> float:
    """Expected wall seconds of one stage job's science (not a request: no safety margin).

    Scales as the request model above; the constants are H2/LiH STO-3G times of the stage
    functions in one process (``benchmarks/bench_jobs.py``: integrals about 0.1-1 s, hamiltonian
    and taper below 0.1 s, optimize below 1 s).
    """
    norb, na, nb = estimate_size(
        _integrals_params(node, plan)
        or {"atoms": "H", "charge": 0, "basis": "sto-3g", "multiplicity": 2}
    )
    dets = float(_determinants(norb, na, nb))
    if node.stage == "integrals":
        return 1.0 + 60.0 * dets / 200_000
    if node.stage in ("hamiltonian", "taper"):
        return 0.5 + 2.0 ** min(2 * norb, 60) / 2**20
    if node.stage == "optimize":
        size = optimize_size(node, plan)
        return 1.0 + 60.0 * (float(size["runtime_min"]) - 15.0)
    return 5.0


def point_components(plan: Plan) -> list[list[str]]:
    """Connected components of the plan's stage graph (parents linked to children).

    Each is the stage chain of one molecule point (more than one point when a scan starts each
    point from its neighbour). Snakemake's job groups run one component per group job, and
    ``group-components`` packs several components into one scheduler job.
    """
    root = {k: k for k in plan.nodes}

    def find(k: str) -> str:
        while root[k] != k:
            root[k] = root[root[k]]
            k = root[k]
        return k

    for key, node in plan.nodes.items():
        for parent in node.parents.values():
            if parent in root:
                root[find(key)] = find(parent)
    comps: dict[str, list[str]] = {}
    for key in plan.nodes:
        comps.setdefault(find(key), []).append(key)
    return list(comps.values())


def _depths(plan: Plan, keys: list[str]) -> dict[str, int]:
    """Level of each stage job in the DAG (0 for jobs without parents in ``keys``)."""
    inside = set(keys)
    depth: dict[str, int] = {}
    for key in plan.nodes:  # insertion order is parents first
        if key in inside:
            ps = [p for p in plan.nodes[key].parents.values() if p in inside]
            depth[key] = 1 + max((depth[p] for p in ps), default=-1)
    return depth


def group_request(plan: Plan, keys: list[str], cores: int, mem_cap_mb: int) -> dict[str, int]:
    """What Snakemake requests for a group job of ``keys`` (its layered rule, one thread each):
    each DAG level is cut into layers of at most ``cores`` jobs side by side and at most
    ``mem_cap_mb`` of memory (longest runtimes first); a layer's memory is the sum and its
    runtime the longest; the group asks for the widest layer and the sum of layer runtimes."""
    req = {k: stage_resources(plan.nodes[k], plan) for k in keys}
    levels: dict[int, list[str]] = {}
    for key, d in _depths(plan, keys).items():
        levels.setdefault(d, []).append(key)
    mem = runtime = width = 0
    for level in levels.values():
        layer: list[str] = []
        for key in sorted(level, key=lambda k: -req[k]["runtime"]) + [None]:
            full = (
                key is None
                or len(layer) >= max(cores, 1)
                or (
                    layer and sum(req[k]["mem_mb"] for k in layer) + req[key]["mem_mb"] > mem_cap_mb
                )
            )
            if full and layer:
                mem = max(mem, sum(req[k]["mem_mb"] for k in layer))
                width = max(width, len(layer))
                runtime += max(req[k]["runtime"] for k in layer)
                layer = []
            if key is not None:
                layer.append(key)
    return {"mem_mb": mem, "runtime": min(MAX_RUNTIME_MIN, runtime), "threads": width}


def batch_plan(
    plan: Plan,
    target_minutes: float,
    pending: set[str] | None = None,
    cores: int = 1,
    mem_cap_mb: int = 8000,
) -> dict:
    """Scheduler jobs for the plan's stage jobs with Snakemake job groups.

    Components (:func:`point_components`) of the stage jobs still to run (``pending``; all if
    None) are packed ``per_batch`` at a time, ``per_batch`` chosen so that one scheduler job is
    expected to run about ``target_minutes``. Each batch's requests follow Snakemake's rules for
    a group job (:func:`group_request`, ``cores`` and ``mem_cap_mb`` as in the profile).
    Returns ``per_batch`` and ``batches``: a list of dicts with ``jobs``, ``expected_min``,
    ``mem_mb``, ``runtime_min`` and ``threads`` (the request).
    """
    todo = set(plan.nodes) if pending is None else set(pending)
    comps = [[k for k in c if k in todo] for c in point_components(plan)]
    comps = [c for c in comps if c]

    def cost(c: list[str]) -> float:
        return sum(expected_seconds(plan.nodes[k], plan) + STEP_OVERHEAD_S for k in c)

    if not comps:
        return {"per_batch": 1, "batches": []}
    mean = sum(cost(c) for c in comps) / len(comps)
    per_batch = max(1, int((target_minutes * 60 - BATCH_START_S) // max(mean, 1e-9)))
    batches = []
    for i in range(0, len(comps), per_batch):
        keys = [k for c in comps[i : i + per_batch] for k in c]
        req = group_request(plan, keys, cores, mem_cap_mb)
        batches.append(
            {
                "jobs": len(keys),
                "expected_min": (BATCH_START_S + sum(cost([k]) for k in keys)) / 60,
                "mem_mb": req["mem_mb"],
                "runtime_min": req["runtime"],
                "threads": req["threads"],
            }
        )
    return {"per_batch": per_batch, "batches": batches}
