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
also from a closed formula derived in `two_state_closed_form`. `cargo test` only reads these files; CI re-runs this script in
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


def main():
    MODELS.mkdir(parents=True, exist_ok=True)
    OUT.mkdir(parents=True, exist_ok=True)
    for seed in range(1, 7):
        (MODELS / f"random{seed}.toml").write_text(random_model_text(seed))
    paths = sorted((ROOT / "problems").glob("*.toml")) + sorted(MODELS.glob("*.toml"))
    for path in paths:
        result = {
            "model": str(path.relative_to(ROOT)),
            "steady": reference_steady(path),
            "bound_cvxpy": bound_cvxpy(path),
        }
        (OUT / f"{path.stem}.json").write_text(json.dumps(result, indent=1) + "\n")
        print(f"{path.relative_to(ROOT)}: reference written")
    precision_fixtures(paths)
    return 0


if __name__ == "__main__":
    sys.exit(main())
