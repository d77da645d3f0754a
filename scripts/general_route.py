#!/usr/bin/env python3
"""Side-by-side timing against the general-purpose route: the same seeded networks solved with
numpy/scipy (steady state: sparse LU of the generator with one state eliminated) and cvxpy with
its Clarabel back-end (the bound in its natural form with rel_entr), timed the same way as
`ergopath bench` (median wall-clock seconds of several runs), with the ratio ours / theirs and
where that route fails.

Usage (from the repository root, in the pinned environment of scripts/requirements.txt):

    python3 scripts/general_route.py [--steady 100,1000,10000,100000,1000000]
                                     [--bound 100,200,1000] [--runs 3]

Our times come from `ergopath bench` on the identical networks (the SplitMix64 generator and
the construction of src/bench.rs are re-implemented below, bit for bit). The 200-state row also
times the bound end to end from a model file (`ergopath bound FILE --json` against reading the
file with tomllib, building the problem and solving it with cvxpy). When the Python package
is installed (`pip install .`), the 200-state row also times `Model.bound()` called from Python
on a model already in memory (warm: the second and later calls), both the full bound job
(attaining design, speed table, fluctuations, report) and `Model.certified_bound()` (the bound
alone), and a loop of 10 000 steady-state solves of a
10-state model from Python. Writes results/bench/general.csv.
"""

import argparse
import csv
import json
import math
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import cvxpy as cp
import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

ROOT = Path(__file__).resolve().parent.parent
BIN = ROOT / "target" / "release" / "ergopath"
MASK = (1 << 64) - 1


class SplitMix:
    """SplitMix64, as in src/bench.rs."""

    def __init__(self, seed):
        self.state = seed & MASK

    def next_u64(self):
        self.state = (self.state + 0x9E3779B97F4A7C15) & MASK
        z = self.state
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & MASK
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & MASK
        return z ^ (z >> 31)

    def uniform(self):
        return (self.next_u64() >> 11) / float(1 << 53)


def synthetic(family, n, seed):
    """Energies (kT) and channels (a, b, k+, k-, work) of src/bench.rs `synthetic`."""
    rng = SplitMix(seed)
    energies = [4.0 * rng.uniform() - 2.0 for _ in range(n)]
    channels = []

    def add(a, b, work, drive):
        forward = 10.0 ** (2.0 * rng.uniform() - 1.0)
        backward = math.exp(math.log(forward) - (energies[a] - energies[b] + drive - work))
        channels.append((a, b, forward, backward, work))

    for i in range(n):
        add(i, (i + 1) % n, 0.2, 1.0)
    for i in range(n):
        if family == "banded":
            reach = 2 + rng.next_u64() % 19
        else:
            reach = 2 + rng.next_u64() % max(n - 3, 1)
        add(i, (i + reach) % n, 0.0, 0.0)
    return energies, channels


def side_chain(length):
    """A fast driven 4-ring (rates 100 /s, 1 kT stored on its first step, drives 1 kT + work)
    with a slow dead-end chain of `length` states off state 3 (0.01 /s both ways), energies 0:
    the optimum empties the chain geometrically, to about e^(-7.6 length) (as
    tests/fixtures/deep/appendix.toml for length 150)."""
    energies = [0.0] * (4 + length)
    channels = []
    for i in range(4):
        work = 1.0 if i == 0 else 0.0
        drive = 1.0 + work
        channels.append((i, (i + 1) % 4, 100.0, 100.0 * math.exp(-(drive - work)), work))
    for i in range(3, 3 + length):
        channels.append((i, i + 1, 0.01, 0.01, 0.0))
    return energies, channels


def median_seconds(runs, f):
    times, result = [], None
    for _ in range(runs):
        start = time.perf_counter()
        result = f()
        times.append(time.perf_counter() - start)
    return statistics.median(times), result


def steady_scipy(n, channels):
    """Sparse LU of the generator with the last state eliminated (p_last = 1, then normalised)."""
    rows, cols, vals = [], [], []
    for a, b, kf, kb, _ in channels:
        rows += [b, a, a, b]
        cols += [a, a, b, b]
        vals += [kf, -kf, kb, -kb]
    generator = sp.csc_matrix((vals, (rows, cols)), shape=(n, n))
    reduced = generator[:-1, :-1].tocsc()
    rhs = -generator[:-1, -1].toarray().ravel()
    x = spla.splu(reduced).solve(rhs)
    p = np.append(x, 1.0)
    return p / p.sum()


def bound_problem(energies, channels):
    n = len(energies)
    rates, work_gradient = {}, np.zeros(n)
    for a, b, kf, kb, work in channels:
        rates[(a, b)] = rates.get((a, b), 0.0) + kf
        rates[(b, a)] = rates.get((b, a), 0.0) + kb
        work_gradient[a] += work * kf
        work_gradient[b] -= work * kb
    energy = np.array(energies)
    source = np.array([j for (j, _) in rates])
    target = np.array([i for (_, i) in rates])
    r = np.array(list(rates.values()))
    c = np.exp(energy[target] - energy[source])
    p = cp.Variable(n)
    objective = work_gradient @ p - r @ cp.rel_entr(p[source], cp.multiply(c, p[target]))
    return cp.Problem(cp.Maximize(objective), [cp.sum(p) == 1])


def bound_cvxpy(energies, channels):
    problem = bound_problem(energies, channels)
    try:
        problem.solve(solver=cp.CLARABEL)
        value = problem.value
        ok = problem.status == "optimal" and value is not None and math.isfinite(value)
        return problem.status, value if ok else None
    except cp.error.SolverError as e:
        return f"solver error: {str(e).splitlines()[0]}", None


def model_text(energies, channels):
    lines = ['title = "benchmark network"', 'energy_unit = "kT"', ""]
    for i, e in enumerate(energies):
        lines += ["[[state]]", f'name = "s{i}"', f"energy = {e!r}", ""]
    for a, b, kf, kb, work in channels:
        lines += ["[[transition]]", f'from = "s{a}"', f'to = "s{b}"', f"forward = {kf!r}",
                  f"backward = {kb!r}", f"work = {work!r}", ""]
    return "\n".join(lines)


def end_to_end(energies, channels, runs):
    """`ergopath bound FILE` against tomllib + cvxpy, both from the same model file."""
    import tomllib

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "network.toml"
        path.write_text(model_text(energies, channels))
        ours, out = median_seconds(runs, lambda: subprocess.run(
            [BIN, "bound", path, "--json"], capture_output=True, check=True))
        ours_value = json.loads(out.stdout)["bound"]["power"]

        def theirs_run():
            data = tomllib.loads(path.read_text())
            names = {s["name"]: i for i, s in enumerate(data["state"])}
            energy = [s["energy"] for s in data["state"]]
            chans = [(names[t["from"]], names[t["to"]], t["forward"], t["backward"], t["work"])
                     for t in data["transition"]]
            return bound_cvxpy(energy, chans)

        theirs, (status, value) = median_seconds(runs, theirs_run)
    return ours, ours_value, theirs, status, value


def python_route(energies, channels, runs):
    """`Model.bound()` from Python, warm, and the steady-state loop; None without the package."""
    try:
        import ergopath
    except ImportError:
        return None
    model = ergopath.Model.from_toml(model_text(energies, channels), "network")
    model.bound()  # warm: the first call pays for loading the library's pages
    ours, report = median_seconds(runs, model.bound)
    lean, value = median_seconds(runs, model.certified_bound)
    # A 10-state ring with one chord (seeded; every ring step stores 0.2 kT).
    rng = SplitMix(2034)
    small_energies = [rng.uniform() for _ in range(10)]
    small_channels = [(i, (i + 1) % 10, 1 + rng.uniform(), 0.5 + rng.uniform(), 0.2) for i in range(10)]
    small_channels.append((0, 5, 1.0, 1.0, 0.0))
    small = ergopath.Model.from_toml(model_text(small_energies, small_channels), "small")
    loops = []
    for _ in range(runs):
        started = time.perf_counter()
        for _ in range(10_000):
            small.steady()
        loops.append(10_000 / (time.perf_counter() - started))
    return ours, report.to_dict()["bound"]["power"], lean, value.power, statistics.median(loops)


def our_timings(steady_sizes, bound_sizes, runs):
    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run([BIN, "bench", "--sizes", ",".join(map(str, steady_sizes or [100])),
                        "--bound-sizes", ",".join(map(str, bound_sizes or [100])),
                        "--runs", str(runs), "--design-states", "0", "--out", tmp],
                       check=True, capture_output=True)
        steady = {(r["family"], int(r["states"])): float(r["median [s]"])
                  for r in csv.DictReader(open(Path(tmp) / "steady.csv"))}
        bound = {}
        for r in csv.DictReader(open(Path(tmp) / "bound.csv")):
            key = (r["family"], int(r["states"]))
            seconds = float(r["median [s]"])
            bound[key] = min(bound.get(key, seconds), seconds)
    return steady, bound


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--steady", default="100,1000,10000,100000,1000000")
    parser.add_argument("--bound", default="100,200,1000")
    parser.add_argument("--runs", type=int, default=3)
    args = parser.parse_args()
    steady_sizes = [int(s) for s in args.steady.split(",") if s]
    bound_sizes = [int(s) for s in args.bound.split(",") if s]
    if not BIN.exists():
        sys.exit(f"build first: cargo build --release ({BIN} is missing)")
    ours_steady, ours_bound = our_timings(steady_sizes, bound_sizes, args.runs)
    rows = []
    for family in ["banded", "random-chords"]:
        for n in steady_sizes:
            if family == "random-chords" and n > 10_000:
                continue  # as in `ergopath bench`: direct LU fills in beyond this
            energies, channels = synthetic(family, n, 2024 + n)
            theirs, _ = median_seconds(args.runs, lambda: steady_scipy(n, channels))
            ours = ours_steady[(family, n)]
            rows.append([family, n, "steady", ours, theirs, ours / theirs, "ok"])
        for n in bound_sizes:
            energies, channels = synthetic(family, n, 2024 + n)
            theirs, (status, value) = median_seconds(args.runs, lambda: bound_cvxpy(energies, channels))
            ours = ours_bound[(family, n)]
            rows.append([family, n, "bound", ours, theirs, ours / theirs,
                         "ok" if value is not None else f"fails: {status}"])
            if n == 200:
                o, ov, t, status, value = end_to_end(energies, channels, args.runs)
                agree = "ok" if value is not None and abs(ov - value) <= 1e-6 * abs(ov) else \
                    f"fails: {status}" if value is None else f"differs: {value} vs ours {ov}"
                rows.append([family, n, "bound end to end", o, t, o / t, agree])
                from_python = python_route(energies, channels, args.runs)
                if from_python is not None:
                    p, pv, lean, lv, per_second = from_python
                    for task, seconds, ours_value in [("bound job, Python", p, pv), ("bound alone, Python", lean, lv)]:
                        agree = "ok" if value is not None and abs(ours_value - value) <= 1e-6 * abs(ours_value) else \
                            f"fails: {status}" if value is None else f"differs: {value} vs ours {ours_value}"
                        rows.append([family, n, task, seconds, t, seconds / t, agree])
                    rows.append([family, 10, "steady loop /s", per_second, float("nan"), float("nan"),
                                 "10 000 solves from Python"])
    # A family where the general route fails: optima far below the double range.
    for length in [10, 40, 150]:
        energies, channels = side_chain(length)
        o, ov, t, status, value = end_to_end(energies, channels, args.runs)
        agree = "ok" if value is not None and abs(ov - value) <= 1e-6 * abs(ov) else \
            f"fails: {status}" if value is None else f"differs: {value} vs ours {ov}"
        rows.append(["side-chain", 4 + length, "bound end to end", o, t, o / t, agree])
    out = ROOT / "results" / "bench" / "general.csv"
    with open(out, "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["family", "states", "task", "ours [s]", "theirs [s]", "ratio", "their_outcome"])
        w.writerows(rows)
    print(f"{'family':14} {'states':>8} {'task':20} {'ours s':>10} {'theirs s':>10} {'ours/theirs':>11}  their outcome")
    for family, n, task, o, t, ratio, outcome in rows:
        print(f"{family:14} {n:8} {task:20} {o:10.4g} {t:10.4g} {ratio:11.3g}  {outcome}")
    print(f"written: {out}")


if __name__ == "__main__":
    main()
