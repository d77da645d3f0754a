#!/usr/bin/env python3
"""Independent reference values for the Rust test suite, computed with general-purpose libraries.

Reads each model file with Python's own TOML parser and applies the units and local detailed
balance of the model format independently of the Rust code, then computes:

* the steady state and per-transition fluxes, powers and entropy production with mpmath
  (arbitrary precision, 50 digits: every probability to full relative accuracy), cross-checked
  against scipy's sparse LU of the generator with one row and column eliminated;
* the universal bound max_p Phi(p) with cvxpy and its Clarabel back-end, in the natural
  formulation W(p) - sum r_ij rel_entr(p_j, c_ij p_i) over the simplex, with the solver's status
  (values rounded to 7 significant digits so the fixture does not depend on the last bits);

and writes them to tests/fixtures/reference/<model>.json. It also (re)writes the seeded random
models in tests/fixtures/models/, and writes tests/fixtures/precision/reference.json: the mean
and diffusion coefficient of the work current of every model from finite differences of the
leading eigenvalue of the tilted generator (mpmath at 50 digits, cross-checked by numpy's dense
eigenvalues), and of seeded two-state models (tests/fixtures/precision/twostate<k>.toml), there
also from a closed formula derived in `two_state_closed_form`. It also writes
tests/fixtures/bound_mp/<case>.json: the bound (all pairs, the model's own pairs, within each
environment state, or a pair restriction) bracketed to 1e-30 relative at 50 digits by a damped
Newton method and its certificate (`bound_mp`), checked against the cvxpy values where those
solve the same program; tests/fixtures/designs/<model>.json: the power of every design the demo
saved in results/<model>/design.json, from the designed network's steady state at 50 digits; and
tests/fixtures/sensitivity/<case>.json: the derivative of the baseline power, the bound and the
rank-1 saved design's power with respect to every parameter, by central differences of those
50-digit computations (`sensitivity_fixtures`); and tests/fixtures/capabilities/<model>.json
(`capability_fixtures`): for every saved rate-cap sweep point and every reached speed-frontier
cap, the rate-capped program (methods section 5) solved by cvxpy/Clarabel at tight tolerances
with its status, and for every scaled model of the saved regimes report its 50-digit headroom
(`bound_mp`). `cargo test` only reads these files; CI re-runs this script in
a fresh virtual environment with the pinned versions of scripts/requirements.txt and fails if
any fixture changes.

Usage: python scripts/reference.py            (from the repository root)
"""

import json
import math
import sys
import tomllib
from pathlib import Path

import cvxpy as cp
import mpmath as mp
import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

ROOT = Path(__file__).resolve().parent.parent
MODELS = ROOT / "tests" / "fixtures" / "models"
# Largest difference between scipy's sparse-LU steady state and the mpmath one accepted (both
# are exact to round-off; measured 1e-17 to 1e-16 on the shipped models).
SCIPY_AGREEMENT = 1e-12
OUT = ROOT / "tests" / "fixtures" / "reference"

# Exact SI constants (2019 SI).
K_B = 1.380649e-23
N_A = 6.02214076e23
E_CHARGE = 1.602176634e-19

mp.mp.dps = 50


def joules_per_unit(unit, temperature):
    return {
        "kT": K_B * temperature,
        "kJ/mol": 1e3 / N_A,
        "kcal/mol": 4184.0 / N_A,
        "eV": E_CHARGE,
        "zJ": 1e-21,
        "pN nm": 1e-21,
    }[unit]


def load_model(path):
    """The network of a model file: energies in kT, channels (a, b, k+, k-, work kT, drive kT)."""
    data = tomllib.loads(Path(path).read_text())
    temperature = data.get("temperature", 298.15)
    unit = data.get("energy_unit", "kT")
    to_kt = joules_per_unit(unit, temperature) / (K_B * temperature)
    names = [s["name"] for s in data["state"]]
    energy = [mp.mpf(s.get("energy", 0.0)) * to_kt for s in data["state"]]
    index = {n: i for i, n in enumerate(names)}
    channels = []
    for t in data["transition"]:
        a, b = index[t["from"]], index[t["to"]]
        kf = mp.mpf(t["forward"])
        work = mp.mpf(t.get("work", 0.0)) * to_kt
        bias = energy[a] - energy[b] - work
        if "drive" in t:
            drive = mp.mpf(t["drive"]) * to_kt
            kb = kf * mp.exp(-(bias + drive))
        else:
            kb = mp.mpf(t["backward"])
            drive = mp.log(kf / kb) - bias
        channels.append((a, b, kf, kb, work, drive))
    if "environment" not in data:
        return {"names": names, "energy": energy, "channels": channels, "to_kt": to_kt}
    # Fluctuating environment: the joint chain over (state, environment), written here from the
    # README's description (joint state s*E + e; each transition copied into the environment
    # states it lists, in that order, else all; then each switch copied for every state, with
    # its drive from LDB), independently of the Rust construction.
    envs = [e["name"] for e in data["environment"]]
    count = len(envs)
    joint_channels = []
    for t, (a, b, kf, kb, work, drive) in zip(data["transition"], channels):
        for e in [envs.index(x) for x in t.get("environments", envs)]:
            joint_channels.append((a * count + e, b * count + e, kf, kb, work, drive))
    for s in data["switch"]:
        x, y = envs.index(s["from"]), envs.index(s["to"])
        kf, kb = mp.mpf(s["forward"]), mp.mpf(s["backward"])
        for i in range(len(names)):
            joint_channels.append((i * count + x, i * count + y, kf, kb, mp.mpf(0), mp.log(kf / kb)))
    joint_names = [f"{n}@{e}" for n in names for e in envs]
    joint_energy = [energy[j // count] for j in range(len(names) * count)]
    return {"names": joint_names, "energy": joint_energy, "channels": joint_channels, "to_kt": to_kt}


def generator_mp(model):
    n = len(model["names"])
    r = mp.zeros(n, n)
    for a, b, kf, kb, _, _ in model["channels"]:
        r[b, a] += kf
        r[a, a] -= kf
        r[a, b] += kb
        r[b, b] -= kb
    return r


def steady_mp(model):
    """R p = 0 with the last equation replaced by normalisation, solved at 50 digits."""
    n = len(model["names"])
    a = generator_mp(model)
    for j in range(n):
        a[n - 1, j] = mp.mpf(1)
    rhs = mp.zeros(n, 1)
    rhs[n - 1] = mp.mpf(1)
    p = mp.lu_solve(a, rhs)
    return [p[i] for i in range(n)]


def steady_scipy(model):
    """Sparse LU (SuperLU) of the generator with state 0's row and column eliminated."""
    n = len(model["names"])
    rows, cols, vals = [], [], []
    for a, b, kf, kb, _, _ in model["channels"]:
        kf, kb = float(kf), float(kb)
        rows += [b, a, a, b]
        cols += [a, a, b, b]
        vals += [kf, -kf, kb, -kb]
    r = sp.csc_matrix((vals, (rows, cols)), shape=(n, n))
    reduced = r[1:, 1:].tocsc()
    x = spla.splu(reduced).solve(-r[1:, 0].toarray().ravel())
    p = np.concatenate([[1.0], x])
    return p / p.sum()


def observables(model, p):
    fluxes, power, drive_power, sigma = [], mp.mpf(0), mp.mpf(0), mp.mpf(0)
    for a, b, kf, kb, work, drive in model["channels"]:
        j = kf * p[a] - kb * p[b]
        fluxes.append(j)
        power += work * j
        drive_power += drive * j
        sigma += j * mp.log(kf * p[a] / (kb * p[b]))
    return fluxes, power, drive_power, sigma


def reference_steady(path):
    model = load_model(path)
    p = steady_mp(model)
    p_scipy = steady_scipy(model)
    worst = max(abs(float(x) - y) for x, y in zip(p, p_scipy))
    # The size of this round-off difference varies with the machine (1e-17 to 1e-16 between
    # runs), so the fixture records the agreement that is checked, not the difference itself.
    assert worst < SCIPY_AGREEMENT, f"{path}: scipy's sparse LU and mpmath disagree by {worst}"
    fluxes, power, drive_power, sigma = observables(model, p)
    to_unit = 1 / model["to_kt"]
    return {
        "probabilities": [float(x) for x in p],
        "fluxes": [float(x) for x in fluxes],
        "power": float(power * to_unit),
        "drive_power": float(drive_power * to_unit),
        "entropy_production": float(sigma),
        "scipy_agrees_within": SCIPY_AGREEMENT,
    }


def bound_cvxpy(path):
    """Phi* = max W(p) + sum_i (R p)_i ln(p_i / peq_i) over the simplex, in kT per time unit."""
    model = load_model(path)
    n = len(model["names"])
    energy = np.array([float(e) for e in model["energy"]])
    rates = {}
    work_gradient = np.zeros(n)
    for a, b, kf, kb, work, _ in model["channels"]:
        rates[(a, b)] = rates.get((a, b), 0.0) + float(kf)  # jump a -> b
        rates[(b, a)] = rates.get((b, a), 0.0) + float(kb)
        work_gradient[a] += float(work * kf)
        work_gradient[b] -= float(work * kb)
    source = np.array([j for (j, i) in rates])
    target = np.array([i for (j, i) in rates])
    r = np.array(list(rates.values()))
    # c_ij = peq_j / peq_i = exp(E_i - E_j) for the jump j -> i
    c = np.exp(energy[target] - energy[source])
    p = cp.Variable(n)
    objective = work_gradient @ p - r @ cp.rel_entr(p[source], cp.multiply(c, p[target]))
    problem = cp.Problem(cp.Maximize(objective), [cp.sum(p) == 1])
    try:
        problem.solve(solver=cp.CLARABEL)
        status, value = problem.status, problem.value
    except cp.error.SolverError as e:
        status, value = f"solver error: {str(e).splitlines()[0]}", None
    finite = value is not None and math.isfinite(value)
    return {
        "status": status,
        "value_kT": float(f"{value:.7g}") if finite else None,
        "finite": finite,
    }


def random_model_text(seed):
    """A connected random network: a random spanning tree plus extra chords."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 9))
    energies = rng.uniform(-5, 5, n)
    edges = [(int(rng.integers(0, i)), i) for i in range(1, n)]
    for _ in range(int(rng.integers(1, n + 1))):
        a, b = rng.choice(n, 2, replace=False)
        edges.append((int(a), int(b)))
    unit = "kJ/mol" if seed % 3 == 0 else "kT"
    scale = 2.479 if unit == "kJ/mol" else 1.0  # numbers are written in the file's unit
    lines = [
        f"# Random network {seed}: generated by scripts/reference.py (numpy seed {seed}).",
        "# Invented numbers for tests only.",
        f'title = "random network {seed}"',
        f'energy_unit = "{unit}"',
        "",
    ]
    for i in range(n):
        lines += ["[[state]]", f'name = "x{i}"', f"energy = {float(energies[i] * scale)!r}", ""]
    for a, b in edges:
        kf = float(10 ** rng.uniform(-2, 2))
        lines += ["[[transition]]", f'from = "x{a}"', f'to = "x{b}"', f"forward = {kf!r}"]
        if rng.random() < 0.5:
            lines.append(f"drive = {float(rng.uniform(-3, 3) * scale)!r}")
        else:
            lines.append(f"backward = {float(10 ** rng.uniform(-2, 2))!r}")
        if rng.random() < 0.5:
            lines.append(f"work = {float(rng.uniform(-2, 2) * scale)!r}")
        lines.append("")
    return "\n".join(lines)


PRECISION = ROOT / "tests" / "fixtures" / "precision"
# Step of the mpmath central differences: truncation error ~ h^2 (fourth derivative) ~ 1e-24
# relative, cancellation ~ 1e-50 / h^2 = 1e-26, both far below double precision.
FD_STEP = mp.mpf("1e-12")
# numpy's dense eigenvalues (double precision) with Richardson-extrapolated central differences
# at h = 1e-3 and 2e-3 must agree with the mpmath derivatives to this share of max(|J|, |D|):
# a guard against a wrong tilt in either route, not a precision claim.
NUMPY_AGREEMENT = 1e-5


def tilted_mp(model, s):
    """The generator with every jump's rate multiplied by exp(s * work of that jump)."""
    n = len(model["names"])
    r = mp.zeros(n, n)
    for a, b, kf, kb, work, _ in model["channels"]:
        r[b, a] += kf * mp.exp(s * work)
        r[a, a] -= kf
        r[a, b] += kb * mp.exp(-s * work)
        r[b, b] -= kb
    return r


def leading_mp(model, s):
    values = mp.eig(tilted_mp(model, s), left=False, right=False)
    return max(values, key=lambda z: mp.re(z)).real


def leading_numpy(model, s):
    n = len(model["names"])
    r = np.zeros((n, n))
    for a, b, kf, kb, work, _ in model["channels"]:
        kf, kb, work = float(kf), float(kb), float(work)
        r[b, a] += kf * math.exp(s * work)
        r[a, a] -= kf
        r[a, b] += kb * math.exp(-s * work)
        r[b, b] -= kb
    return max(np.linalg.eigvals(r), key=lambda z: z.real).real


def current_and_diffusion(model):
    """J = lambda'(0) and D = lambda''(0) / 2 by central differences (kT, model time unit)."""
    h = FD_STEP
    plus, zero, minus = (leading_mp(model, x) for x in (h, mp.mpf(0), -h))
    current = (plus - minus) / (2 * h)
    diffusion = (plus - 2 * zero + minus) / (2 * h * h)

    def numpy_derivatives(step):
        p, z, m = (leading_numpy(model, x) for x in (step, 0.0, -step))
        return (p - m) / (2 * step), (p - 2 * z + m) / (2 * step * step)

    (j1, d1), (j2, d2) = numpy_derivatives(2e-3), numpy_derivatives(1e-3)
    j_np, d_np = (4 * j2 - j1) / 3, (4 * d2 - d1) / 3
    scale = max(abs(float(diffusion)), abs(float(current)), 1e-300)
    for name, ours, theirs in (("J", current, j_np), ("D", diffusion, d_np)):
        assert abs(float(ours) - theirs) <= NUMPY_AGREEMENT * scale, (name, float(ours), theirs)
    return current, diffusion


def two_state_closed_form(rates):
    """Two states joined by two channels (rates a_c for a -> b storing w_c, b_c for b -> a).

    The tilted generator is [[-A, G(s)], [F(s), -B]] with A = a1 + a2, B = b1 + b2,
    F(s) = sum a_c exp(s w_c), G(s) = sum b_c exp(-s w_c). Its leading eigenvalue is
    lambda(s) = (-(A + B) + sqrt((A - B)^2 + 4 h(s))) / 2 with h = F G, so with S = A + B:
    lambda'(0) = h'/S and lambda''(0) = h''/S - 2 h'^2 / S^3, where h' = F'G + FG' and
    h'' = F''G + 2F'G' + FG'' at s = 0 (F = A, G = B).
    """
    (a1, b1, w1), (a2, b2, w2) = rates
    A, B = a1 + a2, b1 + b2
    S = A + B
    f1, f2 = a1 * w1 + a2 * w2, a1 * w1**2 + a2 * w2**2
    g1, g2 = -(b1 * w1 + b2 * w2), b1 * w1**2 + b2 * w2**2
    h1 = f1 * B + A * g1
    h2 = f2 * B + 2 * f1 * g1 + A * g2
    return h1 / S, (h2 / S - 2 * h1**2 / S**3) / 2


def two_state_model_text(seed):
    rng = np.random.default_rng(1000 + seed)
    rows = []
    for _ in range(2):
        rows.append((float(10 ** rng.uniform(-1, 2)), float(10 ** rng.uniform(-1, 2)),
                     float(rng.uniform(-3, 3))))
    lines = [
        f"# Two-state machine {seed}: generated by scripts/reference.py (numpy seed {1000 + seed}).",
        "# Invented numbers for tests only.",
        f'title = "two-state machine {seed}"',
        'energy_unit = "kT"',
        "",
        "[[state]]", 'name = "a"', "energy = 0", "",
        "[[state]]", 'name = "b"', "energy = 0", "",
    ]
    for kf, kb, work in rows:
        lines += ["[[transition]]", 'from = "a"', 'to = "b"', f"forward = {kf!r}",
                  f"backward = {kb!r}", f"work = {work!r}", ""]
    return "\n".join(lines), rows


def precision_fixtures(paths):
    PRECISION.mkdir(parents=True, exist_ok=True)
    entries = []
    for path in paths:
        model = load_model(path)
        current, diffusion = current_and_diffusion(model)
        to_unit = 1 / model["to_kt"]
        entries.append({
            "model": str(path.relative_to(ROOT)),
            "power": float(current * to_unit),
            "diffusion": float(diffusion * to_unit * to_unit),
        })
    for seed in range(1, 5):
        text, rows = two_state_model_text(seed)
        path = PRECISION / f"twostate{seed}.toml"
        path.write_text(text)
        model = load_model(path)
        current, diffusion = current_and_diffusion(model)
        closed_j, closed_d = two_state_closed_form(
            [(mp.mpf(kf), mp.mpf(kb), mp.mpf(w)) for kf, kb, w in rows])
        scale = abs(closed_d) + abs(closed_j)
        # The eigenvalue route and the closed formula are independent: they must agree to
        # the finite differences' own accuracy.
        assert abs(closed_j - current) < mp.mpf("1e-20") * scale, (closed_j, current)
        assert abs(closed_d - diffusion) < mp.mpf("1e-20") * scale, (closed_d, diffusion)
        entries.append({
            "model": str(path.relative_to(ROOT)),
            "power": float(current),
            "diffusion": float(diffusion),
            "closed_form_power": float(closed_j),
            "closed_form_diffusion": float(closed_d),
        })
    result = {
        "about": "J = lambda'(0) and D = lambda''(0)/2 of the tilted generator by central "
                 "differences at h = 1e-12 with mpmath (50 digits), in model units",
        "numpy_agrees_within": NUMPY_AGREEMENT,
        "entries": entries,
    }
    (PRECISION / "reference.json").write_text(json.dumps(result, indent=1) + "\n")
    print("tests/fixtures/precision/reference.json: reference written")


# ---------------------------------------------------------------------------------------------
# The bound at 50 digits (issue 22 item 2): an independent damped Newton method with its own
# certificate, for tests/fixtures/bound_mp/<case>.json.
#
# Phi(p) = W(p) + sum_i (R p)_i phi_i with phi_i = ln p_i + E_i (E in kT; peq_i ~ exp(-E_i), the
# joint states s@e of an environment model carrying the energy of s, as the Rust
# Network::log_equilibrium of the joint chain does; Phi does not see the normalisation of peq
# because sum_i (R p)_i = 0, nor, under the routability rows below, any factor that is constant
# on each group). Over channels c: a -> b, Phi = sum_c J_c (w_c + phi_b - phi_a).
#
# Derivation of the Newton step used here (written for this script). In u = ln p the gradient is
# gamma_j = p_j dPhi/dp_j = sum_{c: a=j} k+ p_a X_c - sum_{c: b=j} k- p_b X_c + (R p)_j with
# X_c = w_c + phi_b - phi_a, and P H P (H the Hessian of Phi in p, P = diag p) is minus the graph
# Laplacian L with edge weights w_jk = R_jk p_k + R_kj p_j (the one-way traffic of the pair):
# its entries are R_jk p_k + R_kj p_j - delta_jk (R p)_j and its rows sum to zero. That is the
# Lagrangian Hessian in u at a KKT point (the curvature of the exponential map is multiplied by
# the gradient's residual, which vanishes there), so Newton with it converges quadratically, and
# it is negative semi-definite everywhere (concavity), so every step is an ascent direction.
# Constraints, linearised in u at a feasible p: p . du = 0 (the simplex) and c_G . du = 0 with
# c_G = P R^T 1_G for every connected group G of (states, allowed pairs) but the first (the
# routability rows sum_{i in G} (R p)_i = 0). The KKT system
#     L du = gamma - lambda_0 p - sum_G lambda_G c_G,   p . du = 0,   c_G . du = 0
# has lambda_0 = sum_j gamma_j = Phi(p) (Phi is homogeneous of degree one, and every c_G sums to
# the group's residual, zero), so each solve is a Laplacian solve with one state grounded, done
# by a subtraction-free elimination (the pivot is the sum of the remaining weights, as in GTH).
# Then du is shifted by a constant to p . du = 0, which no c_G sees.
#
# Certificate: for concave Phi and any mu, max {Phi(q): q in the simplex, A q = 0} <=
# Phi(p) + mu . (A p) + max_i h_i - h . p with h = grad Phi(p) + A^T mu (A: the rows 1_G^T R).
# With mu = -lambda_G from the KKT solve at the final p, h_j - lambda_0 = r_j / p_j where
# r = gamma - lambda_0 p - sum_G lambda_G c_G = L du, so the gap is max_j r_j / p_j - sum_j r_j.

BOUND_MP = ROOT / "tests" / "fixtures" / "bound_mp"
BOUND_MP_TARGET = mp.mpf("1e-30")  # (upper - lower) / |lower| aimed for
BOUND_MP_MAX_STEPS = 400
# Newton values and the existing cvxpy values (7 significant digits, Clarabel's tolerances) must
# agree to this share of max(|value|, 1 kT per time unit).
CVXPY_AGREEMENT = 1e-6


def elimination_order(n, edges, last):
    """Greedy minimum-degree order of the states (ties to the lower index), `last` at the end."""
    neighbours = [set() for _ in range(n)]
    for a, b in edges:
        if a != b:
            neighbours[a].add(b)
            neighbours[b].add(a)
    remaining = set(range(n)) - {last}
    order = []
    while remaining:
        k = min(remaining, key=lambda i: (len(neighbours[i]), i))
        order.append(k)
        remaining.discard(k)
        for i in neighbours[k]:
            neighbours[i].discard(k)
            neighbours[i] |= neighbours[k] - {i}
        neighbours[k] = set()
    return order + [last]


def gth_stationary(n, rates, order):
    """Stationary vector of the chain with rates[(i, j)] (jump i -> j), by the subtraction-free
    elimination of Grassmann, Taksar and Heyman in the given order (last state kept)."""
    out = [dict() for _ in range(n)]
    inc = [dict() for _ in range(n)]
    for (i, j), r in rates.items():
        out[i][j] = out[i].get(j, mp.mpf(0)) + r
        inc[j][i] = out[i][j]
    saved = []
    for k in order[:-1]:
        s_k = mp.fsum(out[k].values())
        incoming = dict(inc[k])
        for i, q_ik in incoming.items():
            del out[i][k]
            for j, q_kj in out[k].items():
                if j == i:
                    continue
                out[i][j] = out[i].get(j, mp.mpf(0)) + q_ik * q_kj / s_k
                inc[j][i] = out[i][j]
        for j in out[k]:
            del inc[j][k]
        saved.append((k, incoming, s_k))
    pi = [mp.mpf(0)] * n
    pi[order[-1]] = mp.mpf(1)
    for k, incoming, s_k in reversed(saved):
        pi[k] = mp.fsum(pi[i] * q for i, q in incoming.items()) / s_k
    total = mp.fsum(pi)
    return [x / total for x in pi]


def laplacian_solve(n, weights, order, rhs_list):
    """x with L x = b (L the Laplacian of the symmetric weights[(i, j)], i < j) and x = 0 at the
    last state of `order`, for each b of rhs_list (each summing to zero), by elimination in
    `order` with the pivot taken as the sum of the remaining weights."""
    adj = [dict() for _ in range(n)]
    for (i, j), w in weights.items():
        adj[i][j] = w
        adj[j][i] = w
    rhs = [list(b) for b in rhs_list]
    saved = []
    for k in order[:-1]:
        row = dict(adj[k])
        d_k = mp.fsum(row.values())
        keys = sorted(row)
        for b in rhs:
            for i in keys:
                b[i] += row[i] * b[k] / d_k
        for i in keys:
            del adj[i][k]
        for x, i in enumerate(keys):
            for j in keys[x + 1:]:
                add = row[i] * row[j] / d_k
                adj[i][j] = adj[i].get(j, mp.mpf(0)) + add
                adj[j][i] = adj[i][j]
        saved.append((k, row, d_k, [b[k] for b in rhs]))
    solutions = []
    for index in range(len(rhs)):
        x = [mp.mpf(0)] * n
        for k, row, d_k, bk in reversed(saved):
            x[k] = (bk[index] + mp.fsum(w * x[j] for j, w in row.items())) / d_k
        solutions.append(x)
    return solutions


def model_pair_context(path):
    """System state names, environment names (or None) and the `[pathways] pairs` of a file."""
    data = tomllib.loads(Path(path).read_text())
    envs = [e["name"] for e in data["environment"]] if "environment" in data else None
    return [s["name"] for s in data["state"]], envs, data.get("pathways", {}).get("pairs")


def pair_groups(path, model, pairs):
    """Connected groups of (joint states, allowed pairs). `pairs`: "all" or a list of (a, b)
    state names (system names stand for their copy in each environment state)."""
    system, envs, _ = model_pair_context(path)
    n = len(model["names"])
    index = {name: i for i, name in enumerate(model["names"])}
    count = len(envs) if envs else 1
    parent = list(range(n))

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    def join(i, j):
        parent[max(find(i), find(j))] = min(find(i), find(j))

    if pairs == "all":
        for i in range(n):
            for j in range(i + 1, n):
                if i % count == j % count:  # same environment state (always, without one)
                    join(i, j)
    else:
        for a, b in pairs:
            if envs and a in system and b in system:
                for e in range(count):
                    join(system.index(a) * count + e, system.index(b) * count + e)
            else:
                i, j = index[a], index[b]
                assert i % count == j % count, f"{a}/{b} joins two environment states"
                join(i, j)
    groups = {}
    for i in range(n):
        groups.setdefault(find(i), []).append(i)
    return sorted(groups.values())


class BoundProblem:
    """Phi, its u-gradient, the Newton weights and the routability rows of one model."""

    def __init__(self, model, groups):
        self.n = len(model["names"])
        self.channels = model["channels"]
        self.energy = model["energy"]
        self.groups = groups
        self.group_of = [0] * self.n
        for g, members in enumerate(groups):
            for i in members:
                self.group_of[i] = g
        self.rates = {}  # jump i -> j, parallel channels summed
        for a, b, kf, kb, _, _ in self.channels:
            self.rates[(a, b)] = self.rates.get((a, b), mp.mpf(0)) + kf
            self.rates[(b, a)] = self.rates.get((b, a), mp.mpf(0)) + kb
        edges = sorted({(min(a, b), max(a, b)) for a, b, *_ in self.channels})
        self.edges = edges
        self.order = elimination_order(self.n, edges, self.n - 1)
        self.orders = {}

    def grounded_order(self, p):
        """An elimination order ending at the most probable state: the Laplacian solves drop
        that state's equation, so the round-off by which a right-hand side fails to sum to zero
        lands on the state with the most traffic, never on a nearly empty one."""
        ground = max(range(self.n), key=lambda i: (p[i], -i))
        if ground not in self.orders:
            self.orders[ground] = elimination_order(self.n, self.edges, ground)
        return self.orders[ground]

    def phi_terms(self, p):
        logp = [mp.log(x) for x in p]
        phi = [lp + e for lp, e in zip(logp, self.energy)]
        return logp, phi

    def value(self, p):
        _, phi = self.phi_terms(p)
        return mp.fsum((kf * p[a] - kb * p[b]) * (w + phi[b] - phi[a])
                       for a, b, kf, kb, w, _ in self.channels)

    def value_scale(self, p):
        """Sum of the magnitudes of Phi's terms (for its round-off)."""
        _, phi = self.phi_terms(p)
        return mp.fsum((kf * p[a] + kb * p[b]) * abs(w + phi[b] - phi[a])
                       for a, b, kf, kb, w, _ in self.channels)

    def power(self, p):
        return mp.fsum(w * (kf * p[a] - kb * p[b]) for a, b, kf, kb, w, _ in self.channels)

    def gradient_u(self, p):
        """gamma_j = p_j dPhi/dp_j, and the sums of the magnitudes of its terms."""
        _, phi = self.phi_terms(p)
        gamma = [[] for _ in range(self.n)]
        for a, b, kf, kb, w, _ in self.channels:
            x = w + phi[b] - phi[a]
            fa, fb = kf * p[a], kb * p[b]
            gamma[a] += [fa * x, fb, -fa]
            gamma[b] += [-fb * x, fa, -fb]
        return [mp.fsum(t) for t in gamma], [mp.fsum(abs(x) for x in t) for t in gamma]

    def weights(self, p):
        w = {}
        for (i, j), r in self.rates.items():
            key = (min(i, j), max(i, j))
            w[key] = w.get(key, mp.mpf(0)) + r * p[i]
        return w

    def group_flows(self, p):
        """F[G][H]: probability flow from group G to group H (G != H)."""
        m = len(self.groups)
        flows = [[[] for _ in range(m)] for _ in range(m)]
        for (i, j), r in self.rates.items():
            g, h = self.group_of[i], self.group_of[j]
            if g != h:
                flows[g][h].append(r * p[i])
        return [[mp.fsum(f) for f in row] for row in flows]

    def residuals(self, p):
        """sum_{i in G} (R p)_i for each group (inflow minus outflow), and the outflows."""
        f = self.group_flows(p)
        m = len(self.groups)
        outflow = [mp.fsum(f[g]) for g in range(m)]
        return [mp.fsum(f[h][g] for h in range(m)) - outflow[g] for g in range(m)], outflow

    def rows(self, p):
        """c_G = P R^T 1_G for every group but the first: (c_G)_j = p_j sum_{i in G} R_ij."""
        out = []
        for g in range(1, len(self.groups)):
            c = [[] for _ in range(self.n)]
            for (i, j), r in self.rates.items():
                gi, gj = self.group_of[i] == g, self.group_of[j] == g
                if gj and not gi:
                    c[i].append(r * p[i])
                elif gi and not gj:
                    c[i].append(-r * p[i])
            out.append([mp.fsum(t) for t in c])
        return out

    def project(self, q):
        """Rescale each group by one factor so that every group's inflow equals its outflow
        (the factors: the stationary vector of the chain of groups), then normalise."""
        m = len(self.groups)
        if m > 1:
            f = self.group_flows(q)
            rates = {(g, h): f[g][h] for g in range(m) for h in range(m) if g != h and f[g][h] > 0}
            x = gth_stationary(m, rates, elimination_order(m, list(rates), m - 1))
            q = [qi * x[self.group_of[i]] for i, qi in enumerate(q)]
        total = mp.fsum(q)
        return [qi / total for qi in q]

    def newton(self, p):
        """Newton step du, the multipliers, and the certificate's gap at the feasible p."""
        gamma, magnitude = self.gradient_u(p)
        lam0 = mp.fsum(gamma)
        r0 = [g - lam0 * x for g, x in zip(gamma, p)]
        c = self.rows(p)
        sols = laplacian_solve(self.n, self.weights(p), self.grounded_order(p), [r0] + c)
        x0, xs = sols[0], sols[1:]
        k = len(c)
        lam = []
        if k:
            s = mp.matrix(k, k)
            rhs = mp.matrix(k, 1)
            for a in range(k):
                rhs[a] = mp.fsum(ci * xi for ci, xi in zip(c[a], x0))
                for b in range(k):
                    s[a, b] = mp.fsum(ci * xi for ci, xi in zip(c[a], xs[b]))
            sol = mp.lu_solve(s, rhs)
            lam = [sol[a] for a in range(k)]
        du = [x0[j] - mp.fsum(lam[g] * xs[g][j] for g in range(k)) for j in range(self.n)]
        shift = mp.fsum(pj * d for pj, d in zip(p, du))
        du = [d - shift for d in du]
        r = [r0[j] - mp.fsum(lam[g] * c[g][j] for g in range(k)) for j in range(self.n)]
        residual, _ = self.residuals(p)
        # mu = -lambda_G; A p = the residuals of groups 1.. (group 0's row is redundant)
        gap = max(rj / pj for rj, pj in zip(r, p)) - mp.fsum(r) \
            - mp.fsum(lam[g] * residual[g + 1] for g in range(k))
        ascent = mp.fsum(g * d for g, d in zip(gamma, du))
        # round-off of the gap: that of each r_j (its terms' magnitudes times 10^-dps) over p_j
        eps = mp.mpf(10) ** (-mp.mp.dps)
        gap_roundoff = 2 * eps * max(
            (magnitude[j] + abs(lam0 * p[j]) + mp.fsum(abs(lam[g] * c[g][j]) for g in range(k)))
            / p[j] for j in range(self.n))
        return du, lam, gap, ascent, gap_roundoff


def bound_mp(model, groups):
    """max Phi over the simplex under the routability rows of `groups`, at 50 digits: damped
    Newton from the baseline steady state, every iterate exactly feasible."""
    assert mp.mp.dps == 50
    problem = BoundProblem(model, groups)
    p = gth_stationary(problem.n, problem.rates, problem.order)
    baseline = problem.power(p)
    value = problem.value(p)
    # R pi = 0, so Phi(pi) = W(pi): a check of Phi's channel sum against the power
    assert abs(value - baseline) <= mp.mpf("1e-45") * problem.value_scale(p), (value, baseline)
    if problem.n <= 30:
        # the subtraction-free elimination against mpmath's LU of the generator (both 50
        # digits; the LU is exact to 50 digits of the largest probability only)
        assert max(abs(x - y) for x, y in zip(p, steady_mp(model))) < mp.mpf("1e-45")
    steps = 0
    history = []
    radius = mp.mpf(1)  # largest change of any ln p_i in one step
    while True:
        du, lam, gap, ascent, gap_roundoff = problem.newton(p)
        history.append(gap)
        upper = value + gap
        if gap <= BOUND_MP_TARGET * abs(value) or steps >= BOUND_MP_MAX_STEPS:
            break
        # stalled: three steps in a row without halving the gap, once in the quadratic regime
        if len(history) > 3 and all(history[-i] > history[-i - 1] / 2 for i in (1, 2, 3)) \
                and gap < mp.mpf("1e-20") * abs(value):
            break
        logp = [mp.log(x) for x in p]
        # Trust region on the change of ln p: far from the optimum the Newton model (exact only
        # at a KKT point) can ask for changes of ln p by thousands, which would throw nearly
        # empty states far past their optimum; the radius grows fourfold after every full
        # step it cut and shrinks to what the line search accepted.
        largest = max(abs(d) for d in du)
        t_max = min(mp.mpf(1), radius / largest)
        # Where the predicted gain is below Phi's own round-off the line search cannot judge a
        # step: the full Newton step is taken there (quadratic convergence; the certificate,
        # not the path, is what the bracket rests on), unless it loses more than round-off.
        roundoff = mp.mpf(10) ** (-mp.mp.dps) * problem.value_scale(p)
        unresolved = ascent < 100 * roundoff
        t = t_max
        while True:
            trial = problem.project([mp.exp(lp + t * d) for lp, d in zip(logp, du)])
            new = problem.value(trial)
            if new >= value + mp.mpf("1e-4") * t * ascent or (unresolved and
                                                               new >= value - 100 * roundoff):
                break
            if t < mp.mpf("1e-12"):
                trial, new = None, None
                break
            t /= 2
        if trial is None:
            break  # no ascent left that 50 digits resolve
        if t == t_max and t_max < 1:
            radius *= 4
        elif t < t_max:
            radius = max(t * largest, mp.mpf("0.1"))
        p, value = trial, new
        steps += 1
    residual, outflow = problem.residuals(p)
    relative = max([abs(x) / o for x, o in zip(residual, outflow) if o > 0], default=mp.mpf(0))
    assert relative < mp.mpf("1e-40"), relative
    return {
        "p": p,
        "value": value,
        "upper": upper,
        "baseline_power": baseline,
        "steps": steps,
        "roundoff": mp.mpf(10) ** (-mp.mp.dps) * problem.value_scale(p) + gap_roundoff,
        "constraint_residual": relative,
    }


def bound_cvxpy_routable(model, groups):
    """The same program with cvxpy and Clarabel, the routability rows added (double precision)."""
    n = len(model["names"])
    energy = np.array([float(e) for e in model["energy"]])
    rates = {}
    work_gradient = np.zeros(n)
    for a, b, kf, kb, work, _ in model["channels"]:
        rates[(a, b)] = rates.get((a, b), 0.0) + float(kf)
        rates[(b, a)] = rates.get((b, a), 0.0) + float(kb)
        work_gradient[a] += float(work * kf)
        work_gradient[b] -= float(work * kb)
    source = np.array([j for (j, i) in rates])
    target = np.array([i for (j, i) in rates])
    r = np.array(list(rates.values()))
    c = np.exp(energy[target] - energy[source])
    gen = np.zeros((n, n))
    for (j, i), k in rates.items():
        gen[i, j] += k
        gen[j, j] -= k
    p = cp.Variable(n)
    objective = work_gradient @ p - r @ cp.rel_entr(p[source], cp.multiply(c, p[target]))
    constraints = [cp.sum(p) == 1]
    for members in groups[1:]:
        constraints.append(gen[members, :].sum(axis=0) @ p == 0)
    problem = cp.Problem(cp.Maximize(objective), constraints)
    problem.solve(solver=cp.CLARABEL)
    return problem.status, problem.value


def mp_digits(x, digits=30):
    return mp.nstr(x, digits, strip_zeros=False, min_fixed=-3, max_fixed=6)


STIFF = ROOT / "tests" / "fixtures" / "stiff"


def bound_mp_cases():
    """(fixture name, model path, pairs: None for the default, or a list of (a, b) names)."""
    cases = [(p.stem, p, None) for p in sorted((ROOT / "problems").glob("*.toml"))]
    cases += [(p.stem, p, None) for p in sorted(MODELS.glob("random*.toml"))]
    cases.append(("appendix", ROOT / "tests" / "fixtures" / "deep" / "appendix.toml", None))
    cases.append(("walker-pairs", ROOT / "problems" / "walker.toml",
                  [("empty", "stepped"), ("fuel_bound", "hydrolysed")]))
    cases += [(f"stiff-{p.stem}", p, None) for p in sorted(STIFF.glob("*.toml"))]
    return cases


def bound_mp_fixtures(cvxpy_values):
    """Writes tests/fixtures/bound_mp/<case>.json; checks against cvxpy where it applies."""
    BOUND_MP.mkdir(parents=True, exist_ok=True)
    for name, path, pairs in bound_mp_cases():
        model = load_model(path)
        _, envs, file_pairs = model_pair_context(path)
        if pairs is None:
            # the tool's default: the file's [pathways] pairs, else all (within each
            # environment state)
            if file_pairs is None or file_pairs == "all":
                used = "all"
            else:
                used = [tuple(x) for x in file_pairs]
            cli = None
        else:
            used = pairs
            cli = ",".join(f"{a}/{b}" for a, b in pairs)
        groups = pair_groups(path, model, used)
        result = bound_mp(model, groups)
        value, upper = result["value"], result["upper"]
        assert upper >= value
        bracket = (upper - value) / abs(value)
        assert bracket <= BOUND_MP_TARGET, (name, bracket, result["steps"])
        # the round-off of Phi at 50 digits must not cover the bracket's claim
        assert result["roundoff"] < mp.mpf("1e-25") * abs(value), (name, result["roundoff"])
        rel = str(path.relative_to(ROOT))
        if rel in cvxpy_values:
            # an unconstrained program (one group) is what the existing cvxpy value solves; with
            # environments it ran over all pairs of the joint chain, so re-run that here.
            check_groups = groups if envs is None else [list(range(len(model["names"])))]
            check = result if envs is None else bound_mp(model, check_groups)
            theirs = cvxpy_values[rel]
            if len(check_groups) == 1 and theirs is not None:
                diff = abs(float(check["value"]) - theirs)
                assert diff <= CVXPY_AGREEMENT * max(abs(theirs), 1.0), \
                    (name, check["value"], theirs)
        if len(groups) > 1 and "stiff" not in name:
            status, theirs = bound_cvxpy_routable(model, groups)
            diff = abs(float(value) - theirs)
            assert diff <= 1e-5 * max(abs(theirs), 1.0), (name, status, value, theirs)
        to_unit = 1 / model["to_kt"]
        fixture = {
            "model": rel,
            "pairs": "all" if used == "all" else [f"{a}/{b}" for a, b in used],
            "cli_pairs": cli,
            "environment_states": envs,
            "pairs_scope": ("within each environment state" if envs else "all states"),
            "groups": len(groups),
            "states": model["names"],
            "value_kT": mp_digits(value),
            "upper_kT": mp_digits(upper),
            "bracket_relative": float(bracket),
            "roundoff_kT": float(result["roundoff"]),
            # the bracket widened by that round-off estimate (50-digit sums of cancelling terms)
            "bracket_with_roundoff_relative":
                float((upper - value + result["roundoff"]) / abs(value)),
            "baseline_power_kT": mp_digits(result["baseline_power"]),
            "value_model_unit": mp_digits(value * to_unit),
            "upper_model_unit": mp_digits(upper * to_unit),
            "baseline_power_model_unit": mp_digits(result["baseline_power"] * to_unit),
            "log_p": [float(mp.log(x)) for x in result["p"]],
            "newton_steps": result["steps"],
            "constraint_residual_relative": float(result["constraint_residual"]),
        }
        (BOUND_MP / f"{name}.json").write_text(json.dumps(fixture, indent=1) + "\n")
        print(f"tests/fixtures/bound_mp/{name}.json: {mp.nstr(value, 12)} kT per time unit, "
              f"bracket {float(bracket):.1e}, {result['steps']} Newton steps")


DESIGNS = ROOT / "tests" / "fixtures" / "designs"


def design_power_mp(model, pathways):
    """Harvesting power (kT per time unit) of the model plus added pathways, at 50 digits. Each
    pathway is (a, b, forward, backward); its work per forward jump follows from local detailed
    balance with zero drive, w = E_a - E_b - ln(forward / backward) (methods, section 4)."""
    energy = model["energy"]
    added = []
    for a, b, kf, kb in pathways:
        kf, kb = mp.mpf(kf), mp.mpf(kb)
        added.append((a, b, kf, kb, energy[a] - energy[b] - mp.log(kf / kb), mp.mpf(0)))
    joint = dict(model, channels=model["channels"] + added)
    _, power, _, _ = observables(joint, steady_mp(joint))
    return power


def design_fixtures():
    """Writes tests/fixtures/designs/<model>.json: every design the demo saved for a shipped
    model (the bound's attaining and rate-capped designs, the search's ranked designs; rates as
    committed in results/<model>/*.json) with its power at 50 digits."""
    DESIGNS.mkdir(parents=True, exist_ok=True)
    for path in sorted((ROOT / "problems").glob("*.toml")):
        model = load_model(path)
        index = {name: i for i, name in enumerate(model["names"])}
        found = ROOT / "results" / path.stem
        designs = []
        bound = json.loads((found / "bound.json").read_text())
        for key in ("design", "rate_capped"):
            if bound.get(key):
                designs.append((f"bound.json {key}", bound[key]))
        search = found / "design.json"
        if search.exists():
            for d in json.loads(search.read_text())["designs"]:
                designs.append((f"design.json rank {d['rank']}", d))
        sweep = found / "sweep-rate-cap.json"
        if sweep.exists():
            for i, point in enumerate(json.loads(sweep.read_text())["points"]):
                if point["pathways"]:
                    designs.append((f"sweep-rate-cap.json point {i}", point))
        cases = []
        for source, d in designs:
            pathways = [(index[w["from"]], index[w["to"]], w["forward"], w["backward"])
                        for w in d["pathways"]]
            power = design_power_mp(model, pathways) / model["to_kt"]
            cases.append({
                "source": source,
                "pathways": [{"from": w["from"], "to": w["to"], "forward": w["forward"],
                              "backward": w["backward"]} for w in d["pathways"]],
                "power_model_unit": mp_digits(power),
            })
        fixture = {"model": str(path.relative_to(ROOT)), "designs": cases}
        (DESIGNS / f"{path.stem}.json").write_text(json.dumps(fixture, indent=1) + "\n")
        print(f"tests/fixtures/designs/{path.stem}.json: {len(cases)} designs at 50 digits")


CAPABILITIES = ROOT / "tests" / "fixtures" / "capabilities"


def candidate_pairs(model, envs):
    """Every unordered pair of joint states within one environment state (all pairs without
    environments): the candidates of the shipped models' sweeps and rate-capped programs."""
    count = len(envs) if envs else 1
    n = len(model["names"])
    return [(i, j) for i in range(n) for j in range(i + 1, n) if i % count == j % count]


def capped_cvxpy(model, candidates, cap):
    """The rate-capped program of methods section 5 with cvxpy and Clarabel (double precision),
    written here from that section: maximise Phi(p) - sum_e [f_e ln(f_e/g_e) + g_e ln(g_e/f_e)]
    over p in the simplex and one-way fluxes f_e (a -> b), g_e (b -> a) >= 0 of each candidate
    pair, subject to flux balance at every state, f_e <= cap p_a and g_e <= cap p_b. Returns
    (status, value in kT per time unit)."""
    n = len(model["names"])
    energy = np.array([float(e) for e in model["energy"]])
    rates = {}
    work_gradient = np.zeros(n)
    for a, b, kf, kb, work, _ in model["channels"]:
        rates[(a, b)] = rates.get((a, b), 0.0) + float(kf)
        rates[(b, a)] = rates.get((b, a), 0.0) + float(kb)
        work_gradient[a] += float(work * kf)
        work_gradient[b] -= float(work * kb)
    source = np.array([j for (j, i) in rates])
    target = np.array([i for (j, i) in rates])
    r = np.array(list(rates.values()))
    c = np.exp(energy[target] - energy[source])
    gen = np.zeros((n, n))
    for (j, i), k in rates.items():
        gen[i, j] += k
        gen[j, j] -= k
    m = len(candidates)
    incidence = np.zeros((n, m))  # net inflow of f_e: out of a, into b
    for e, (a, b) in enumerate(candidates):
        incidence[a, e] -= 1.0
        incidence[b, e] += 1.0
    start = np.array([a for a, _ in candidates])
    end = np.array([b for _, b in candidates])
    # Conditioning, exact in exact arithmetic: rel_entr(x, c y) = rel_entr(x, y) - x ln c moves
    # the energy factors (up to e^80 on the photoswitch) into the linear part.
    linear = work_gradient + np.bincount(source, weights=r * np.log(c), minlength=n)
    p, f, g = cp.Variable(n), cp.Variable(m), cp.Variable(m)
    objective = (linear @ p - r @ cp.rel_entr(p[source], p[target])
                 - cp.sum(cp.rel_entr(f, g) + cp.rel_entr(g, f)))
    constraints = [cp.sum(p) == 1, gen @ p + incidence @ (f - g) == 0,
                   f <= cap * p[start], g <= cap * p[end]]
    problem = cp.Problem(cp.Maximize(objective), constraints)
    try:
        # Tolerances far below Clarabel's defaults (1e-8): at the defaults the value was off by
        # up to 1e-6 relative on the shipped models, at these by 1e-13 to 4e-11 (against the
        # 50-digit power of designs at the same cap); where they cannot be met the status says
        # `optimal_inaccurate` and the value is not used.
        problem.solve(solver=cp.CLARABEL, tol_gap_abs=1e-12, tol_gap_rel=1e-12, tol_feas=1e-12,
                      tol_ktratio=1e-10, max_iter=400)
    except cp.error.SolverError as e:
        return f"solver error: {str(e).splitlines()[0]}", None
    return problem.status, problem.value


def stored_scaled(model, factor):
    """Every work label times `factor` and each drive raised by `(factor - 1) w`, rates kept
    (the `regimes --scale stored` family: affinities unchanged, the store charged higher)."""
    channels = [(a, b, kf, kb, w * factor, d + (factor - 1) * w)
                for a, b, kf, kb, w, d in model["channels"]]
    return dict(model, channels=channels)


def capability_fixtures():
    """Writes tests/fixtures/capabilities/<model>.json for every shipped model, from what the
    demo saved in results/<model>/: at every point of the rate-cap sweep and at every cap of
    the bound's speed frontier (and its rate-capped design's cap), the rate-capped program's
    optimum from cvxpy (`capped_cvxpy`, the per-rate limit min(cap, total rate) over every
    candidate pair; status kept); and at every scale of the saved `regimes --scale stored`
    sweep, the exact headroom from the 50-digit bound (`bound_mp`) of the scaled network."""
    CAPABILITIES.mkdir(parents=True, exist_ok=True)
    for path in sorted((ROOT / "problems").glob("*.toml")):
        model = load_model(path)
        _, envs, _ = model_pair_context(path)
        to_unit = 1 / model["to_kt"]
        found = ROOT / "results" / path.stem
        pairs = candidate_pairs(model, envs)

        def capped(cap):
            status, value = capped_cvxpy(model, pairs, cap)
            finite = value is not None and math.isfinite(value)
            return {"cap": cap, "status": status,
                    "value_model_unit": value * to_unit if finite else None}

        sweep = json.loads((found / "sweep-rate-cap.json").read_text())
        total = sweep["budget"]["total_rate"]
        fixture = {
            "model": str(path.relative_to(ROOT)),
            "sweep": [capped(min(point["value"], total or math.inf))
                      for point in sweep["points"]],
        }
        bound = json.loads((found / "bound.json").read_text())
        caps = [row["speed"] for row in bound["speed_table"] if row["status"] == "reached"]
        if bound.get("rate_capped"):
            caps.append(bound["rate_capped"]["rate_cap"])
        fixture["bound_caps"] = [capped(cap) for cap in caps]
        regimes = found / "regimes-stored.json"
        if regimes.exists():
            groups = pair_groups(path, model, "all")
            rows = []
            for point in json.loads(regimes.read_text())["points"]:
                result = bound_mp(stored_scaled(model, mp.mpf(point["scale"])), groups)
                rows.append({
                    "scale": point["scale"],
                    "headroom_model_unit":
                        mp_digits((result["value"] - result["baseline_power"]) * to_unit),
                    "bracket_model_unit":
                        float((result["upper"] - result["value"] + result["roundoff"]) * to_unit),
                })
            fixture["regimes_stored"] = rows
        (CAPABILITIES / f"{path.stem}.json").write_text(json.dumps(fixture, indent=1) + "\n")
        solved = sum(x["status"] == "optimal" for x in fixture["sweep"] + fixture["bound_caps"])
        print(f"tests/fixtures/capabilities/{path.stem}.json: {solved} capped programs solved, "
              f"{len(fixture.get('regimes_stored', []))} regimes points")


SENSITIVITY = ROOT / "tests" / "fixtures" / "sensitivity"
# Central-difference step (in each parameter's own unit). At 50 digits with the bound bracketed
# to 1e-30 and below, the difference quotient's noise is bracket / h (about 1e-18 relative) and
# its truncation h^2 / 6 times the third derivative (about 1e-24): both far below double
# precision.
SENSITIVITY_STEP = mp.mpf("1e-12")


def perturbed_network(model, kind, index, h, temperature):
    """The network with one parameter moved by `h` in the model's own unit (methods, section
    10, written here from that description): `ln k` of a channel (both rates scaled), a state
    energy, a work label or a drive (forward rate kept, backward rate from LDB), or the
    temperature (energies, labels and drives fixed in their unit, so their value in kT scales
    as T0 / (T0 + h); the unit's size in kT with them)."""
    to_kt = model["to_kt"]
    energy = list(model["energy"])
    channels = [list(c) for c in model["channels"]]
    if kind == "rate":
        channels[index][2] *= mp.exp(h)
        channels[index][3] *= mp.exp(h)
        return dict(model, channels=[tuple(c) for c in channels])
    if kind == "energy":
        energy[index] += h * to_kt
    elif kind == "work":
        channels[index][4] += h * to_kt
    elif kind == "drive":
        channels[index][5] += h * to_kt
    elif kind == "temperature":
        factor = temperature / (temperature + h)
        energy = [e * factor for e in energy]
        for c in channels:
            c[4] *= factor
            c[5] *= factor
        to_kt = to_kt * factor
    for c in channels:
        a, b, kf, work, drive = c[0], c[1], c[2], c[4], c[5]
        c[3] = kf * mp.exp(-(energy[a] - energy[b] - work + drive))
    return dict(model, energy=energy, channels=[tuple(c) for c in channels], to_kt=to_kt)


def model_unit_powers(model, groups, design):
    """Baseline power, bound (its lower end and its bracket width) and, with `design` (pathways
    as (a, b, forward, backward), rates held fixed), the design's power; all in the model's
    power unit."""
    _, power, _, _ = observables(model, steady_mp(model))
    bound = bound_mp(model, groups)
    out = {
        "power": power / model["to_kt"],
        "bound": bound["value"] / model["to_kt"],
        "bound_bracket": (bound["upper"] - bound["value"] + bound["roundoff"]) / model["to_kt"],
    }
    if design is not None:
        out["design"] = design_power_mp(model, design) / model["to_kt"]
    return out


def sensitivity_cases():
    """(fixture name, model path, design file or None)."""
    cases = []
    for path in sorted((ROOT / "problems").glob("*.toml")):
        design = ROOT / "results" / path.stem / "design.json"
        cases.append((path.stem, path, design if design.exists() else None))
    for stem in ("energy-span", "photon-ring", "pump-switching-slow", "slow-environment"):
        cases.append((f"stiff-{stem}", STIFF / f"{stem}.toml", None))
    return cases


def sensitivity_parameters(model, data):
    """The parameters in the tool's order: rates, energies, work labels, drives, temperature."""
    c, n = len(model["channels"]), len(model["names"])
    parameters = ([("rate", i) for i in range(c)] + [("energy", i) for i in range(n)]
                  + [("work", i) for i in range(c)] + [("drive", i) for i in range(c)])
    if data.get("energy_unit", "kT") != "kT":
        parameters.append(("temperature", 0))
    return parameters


def sensitivity_fixtures():
    """Writes tests/fixtures/sensitivity/<case>.json: the derivative of the baseline power, of
    the bound (over all pairs, within each environment state) and of the rank-1 saved design's
    power with respect to every parameter, by central differences of the 50-digit steady
    state, bound and design power, each with its error estimate (the bracket's noise plus the
    difference to the quotient at step 2h)."""
    SENSITIVITY.mkdir(parents=True, exist_ok=True)
    h = SENSITIVITY_STEP
    for name, path, design_file in sensitivity_cases():
        model = load_model(path)
        data = tomllib.loads(path.read_text())
        temperature = mp.mpf(data.get("temperature", 298.15))
        groups = pair_groups(path, model, "all")
        index = {n: i for i, n in enumerate(model["names"])}
        design = None
        if design_file is not None:
            rank1 = json.loads(design_file.read_text())["designs"][0]
            design = [(index[w["from"]], index[w["to"]], w["forward"], w["backward"])
                      for w in rank1["pathways"]]
        entries = []
        for kind, i in sensitivity_parameters(model, data):
            def at(step):
                return model_unit_powers(perturbed_network(model, kind, i, step, temperature),
                                         groups, design)
            up, down, up2, down2 = at(h), at(-h), at(2 * h), at(-2 * h)
            entry = {"kind": kind, "index": i}
            for key in ("power", "bound", "design"):
                if key not in up:
                    continue
                d = (up[key] - down[key]) / (2 * h)
                d2 = (up2[key] - down2[key]) / (4 * h)
                scale = max(abs(up[key]), abs(down[key]))
                noise = ((up["bound_bracket"] + down["bound_bracket"]) / (2 * h)
                         if key == "bound" else mp.mpf(10) ** -45 * scale / h)
                entry[f"d_{key}"] = mp_digits(d)
                entry[f"d_{key}_error"] = float(abs(d - d2) + noise)
            entries.append(entry)
        fixture = {
            "model": str(path.relative_to(ROOT)),
            "design": str(design_file.relative_to(ROOT)) if design_file else None,
            "design_rank": 1 if design_file else None,
            "step": float(h),
            "parameters": entries,
        }
        (SENSITIVITY / f"{name}.json").write_text(json.dumps(fixture, indent=1) + "\n")
        worst = max(e["d_bound_error"] for e in entries)
        print(f"tests/fixtures/sensitivity/{name}.json: {len(entries)} parameters at 50 digits "
              f"(largest bound-derivative error estimate {worst:.1e})")


def main():
    MODELS.mkdir(parents=True, exist_ok=True)
    OUT.mkdir(parents=True, exist_ok=True)
    for seed in range(1, 7):
        (MODELS / f"random{seed}.toml").write_text(random_model_text(seed))
    paths = sorted((ROOT / "problems").glob("*.toml")) + sorted(MODELS.glob("*.toml"))
    cvxpy_values = {}
    for path in paths:
        result = {
            "model": str(path.relative_to(ROOT)),
            "steady": reference_steady(path),
            "bound_cvxpy": bound_cvxpy(path),
        }
        cvxpy_values[result["model"]] = result["bound_cvxpy"]["value_kT"]
        (OUT / f"{path.stem}.json").write_text(json.dumps(result, indent=1) + "\n")
        print(f"{path.relative_to(ROOT)}: reference written")
    precision_fixtures(paths)
    bound_mp_fixtures(cvxpy_values)
    design_fixtures()
    capability_fixtures()
    sensitivity_fixtures()
    return 0


if __name__ == "__main__":
    sys.exit(main())
