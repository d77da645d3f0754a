"""The Python package against the CLI's JSON, against numpy/scipy and against the committed
reference fixtures (cvxpy with Clarabel, written by scripts/reference.py)."""

import _thread
import subprocess
import json
import math
import pathlib
import threading
import time

import numpy as np
import pytest

import ergopath

from conftest import _binary as _bin

ROOT = pathlib.Path(__file__).resolve().parents[2]
SHIPPED = sorted(p.relative_to(ROOT).as_posix() for p in (ROOT / "problems").glob("*.toml"))


# ----- the same numbers as the CLI ------------------------------------------------------------


@pytest.mark.parametrize("path", SHIPPED)
def test_steady_and_bound_equal_the_cli_json(path, cli, at_root):
    model = ergopath.load(path)
    assert model.steady().to_dict() == cli("steady", path, "--json")
    assert model.bound().to_dict() == cli("bound", path, "--json")


def test_every_job_equals_the_cli_json(cli, at_root):
    path = "problems/ring6.toml"
    model = ergopath.load(path)
    design = model.design(max_pathways=1, rate_cap=100, top=3, threads=1)
    assert design.to_dict() == cli("design", path, "--json", "--max-pathways", "1", "--rate-cap", "100", "--top", "3", "-q")
    sweep = model.sweep("rate_cap", 1, 1e3, points=4, max_pathways=1)
    assert sweep.to_dict() == cli("sweep", path, "--json", "--over", "rate-cap=1..1e3", "--points", "4", "--max-pathways", "1", "-q")
    regimes = model.regimes("stored", 0.1, 10, points=3)
    assert regimes.to_dict() == cli("regimes", path, "--json", "--scale", "stored", "--from", "0.1", "--to", "10", "--points", "3")
    assert model.sensitivity().to_dict() == cli("sensitivity", path, "--json")
    capped = model.bound(pairs=[("s0", "s3")], rate_cap="5/s")
    assert capped.to_dict() == cli("bound", path, "--json", "--pairs", "s0/s3", "--rate-cap", "5/s")
    other = ergopath.load("problems/walker.toml")
    ranked = ergopath.compare([model, other], max_pathways=1, rate_cap="100/s")
    assert ranked.to_dict() == cli("compare", path, "problems/walker.toml", "--json", "--max-pathways", "1", "--rate-cap", "100/s", "-q")
    walker = ergopath.load("problems/walker.toml")
    sampled = walker.uncertainty(200, seed=5, threads=2)
    assert sampled.to_dict() == cli("uncertainty", "problems/walker.toml", "--json", "--samples", "200", "--seed", "5", "-q")
    robust = walker.design(max_pathways=1, top=3, samples=50, quantile=0.1)
    assert robust.to_dict() == cli("design", "problems/walker.toml", "--json", "--max-pathways", "1", "--top", "3", "--samples", "50", "--quantile", "0.1", "-q")
    assert len(sampled.samples_frame) == 200
    drawn = model.draw("bound")
    svg = subprocess.run([str(_bin()), "draw", path, "--of", "bound"], cwd=ROOT, capture_output=True, text=True).stdout
    assert drawn.svg == svg and "digraph network" in drawn.dot
    simulated = model.simulate(5.0, runs=20, seed=3)
    assert simulated.to_dict() == cli("simulate", path, "--json", "--time", "5", "--runs", "20", "--seed", "3", "-q")


def test_results_are_typed_with_numpy_arrays_and_frames(at_root):
    model = ergopath.load("problems/walker.toml")
    steady = model.steady()
    assert isinstance(steady.probabilities, np.ndarray)
    assert steady.probabilities.shape == (len(model.states),)
    frame = steady.to_frame()
    assert list(frame["name"]) == model.states
    np.testing.assert_allclose(frame["probability"].to_numpy(), steady.probabilities, rtol=1e-12)
    bound = model.bound()
    assert isinstance(bound.optimal_probabilities, np.ndarray)
    assert bound.headroom == bound.to_dict()["bound"]["headroom"] > 0
    design = model.design(max_pathways=1, top=2)
    assert len(design.to_frame()) == len(design.to_dict()["designs"]) > 0
    assert "headroom" in bound.text


def test_no_file_is_written_unless_asked(tmp_path, monkeypatch, at_root):
    model = ergopath.load("problems/ring6.toml")
    monkeypatch.chdir(tmp_path)
    model.bound()
    model.design(max_pathways=1, top=1)
    assert list(tmp_path.iterdir()) == []
    model.bound(save=tmp_path / "out")
    written = sorted(p.name for p in (tmp_path / "out" / "ring6").iterdir())
    assert "bound.json" in written and "report.md" in written


# ----- models from Python data --------------------------------------------------------------

RING = """
title = "three-state test ring"
energy_unit = "kJ/mol"
time_unit = "ms"
temperature = 310

[[state]]
name = "a"
energy = 0.0
[[state]]
name = "b"
energy = 2.5
[[state]]
name = "c"
energy = -1.0

[[transition]]
from = "a"
to = "b"
forward = 40.0
drive = 12.0
work = 3.0
label = "pump"
[[transition]]
from = "b"
to = "c"
forward = 7.5
backward = 0.25
[[transition]]
from = "c"
to = "a"
forward = 1.5
drive = 0.0

[pathways]
max_pathways = 1
rate_cap = 20.0
"""


def ring_from_arrays(name="ring"):
    return ergopath.Model.build(
        states=["a", "b", "c"],
        energies=np.array([0.0, 2.5, -1.0]),
        transitions={
            "from": ["a", "b", "c"],
            "to": ["b", "c", "a"],
            "forward": np.array([40.0, 7.5, 1.5]),
            "backward": [None, 0.25, None],
            "drive": [12.0, float("nan"), 0.0],
            "work": np.array([3.0, 0.0, 0.0]),
            "label": ["pump", None, None],
        },
        title="three-state test ring",
        energy_unit="kJ/mol",
        time_unit="ms",
        temperature=310,
        pathways={"max_pathways": 1, "rate_cap": 20.0},
        name=name,
    )


def test_a_model_from_arrays_equals_the_same_model_from_toml():
    from_text = ergopath.Model.from_toml(RING, "ring")
    from_arrays = ring_from_arrays()
    assert from_arrays.steady().to_dict() == from_text.steady().to_dict()
    assert from_arrays.bound().to_dict() == from_text.bound().to_dict()
    assert from_arrays.design(top=2).to_dict() == from_text.design(top=2).to_dict()


def test_a_dataframe_of_transitions_builds_the_same_model():
    pd = pytest.importorskip("pandas")
    table = pd.DataFrame(
        {
            "from": ["a", "b", "c"],
            "to": ["b", "c", "a"],
            "forward": [40.0, 7.5, 1.5],
            "backward": [np.nan, 0.25, np.nan],
            "drive": [12.0, np.nan, 0.0],
            "work": [3.0, 0.0, 0.0],
        }
    )
    built = ergopath.Model.build(
        ["a", "b", "c"], table, energies=[0.0, 2.5, -1.0], energy_unit="kJ/mol", time_unit="ms", temperature=310
    )
    reference = ring_from_arrays()
    np.testing.assert_array_equal(built.steady().probabilities, reference.steady().probabilities)


def test_edits_are_copies_that_keep_the_affinity():
    model = ergopath.Model.from_toml(RING, "ring")
    faster = model.with_rate_scaled(1, 10.0)
    row = faster.to_dict()["transition"][1]
    assert (row["forward"], row["backward"]) == (75.0, 2.5)
    assert model.to_dict()["transition"][1]["forward"] == 7.5  # the original is untouched
    # The drive of the pump is written, so its backward rate follows LDB at any work label:
    # ln(f/b) = (E_a - E_b + drive - work) / kT (methods, section 1). kT at 310 K in kJ/mol
    # from the exact SI values of k_B and N_A (2019 SI).
    kt = 1.380649e-23 * 6.02214076e23 * 310 / 1000
    for work in (0.0, 3.0, 8.0):
        edited = model.with_work("pump", work)
        lifted = edited.to_dict()["transition"][0]
        assert lifted["work"] == work
        assert edited.steady().power == pytest.approx(_numpy_power(edited, kt), rel=1e-9, abs=1e-12)
    with pytest.raises(ergopath.UsageError, match="no transitions match"):
        model.with_rate_scaled("nonexistent", 2.0)


# ----- errors carry the CLI's message, place and fix ----------------------------------------


def test_a_refused_model_raises_with_place_and_fix():
    bad = RING.replace('label = "pump"', 'labl = "pump"')
    with pytest.raises(ergopath.ModelError) as raised:
        ergopath.Model.from_toml(bad, "edited.toml")
    message = str(raised.value)
    line = bad.splitlines().index('labl = "pump"') + 1
    assert f"edited.toml:{line}:" in message
    assert "unknown field `labl`" in message and "fix:" in message


def test_a_missing_file_and_bad_settings_raise_clearly(tmp_path):
    with pytest.raises(ergopath.ModelError, match="missing.toml"):
        ergopath.load(tmp_path / "missing.toml")
    model = ergopath.Model.from_toml(RING, "ring")
    with pytest.raises(ergopath.UsageError, match="rate_cap"):
        model.design(rate_cap="12 furlongs")
    with pytest.raises(ergopath.UsageError, match="pair"):
        model.bound(pairs=[("a", "zz")])
    with pytest.raises(ergopath.UsageError, match="top 0"):
        model.design(top=0)


# ----- long runs ----------------------------------------------------------------------------


def chorded_ring(n, seed):
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(n):
        rows.append({"from": f"s{i}", "to": f"s{(i + 1) % n}", "forward": float(10 ** rng.uniform(-1, 2)), "drive": float(rng.uniform(-1, 3)), "work": float(rng.uniform(0, 1))})
    for _ in range(n // 2):
        a, b = rng.choice(n, 2, replace=False)
        rows.append({"from": f"s{a}", "to": f"s{b}", "forward": float(10 ** rng.uniform(-1, 2)), "drive": 0.0})
    energies = rng.uniform(-2, 2, n)
    return ergopath.Model.build(
        [f"s{i}" for i in range(n)], rows, energies=energies, pathways={"rate_cap": 10.0}, name=f"chorded{n}"
    )


def test_ctrl_c_stops_a_design_search_and_writes_nothing(tmp_path):
    model = chorded_ring(24, 5)
    timer = threading.Timer(0.5, _thread.interrupt_main)
    timer.start()
    started = time.perf_counter()
    try:
        with pytest.raises(KeyboardInterrupt):
            model.design(max_pathways=4, starts=4, threads=1, save=tmp_path)
    finally:
        timer.cancel()
    assert not any(tmp_path.iterdir()), "an interrupted search wrote files"
    # The model stays usable after the interruption.
    assert model.steady().probabilities.sum() == pytest.approx(1.0, abs=1e-12)
    print(f"interrupted after {time.perf_counter() - started:.2f} s")


def test_progress_is_reported_and_threads_do_not_change_the_ranking():
    model = chorded_ring(10, 2)
    seen = []
    one = model.design(max_pathways=2, threads=1, progress=lambda done, total, what: seen.append((done, total, what)))
    two = model.design(max_pathways=2, threads=2)
    assert one.to_dict() == two.to_dict()
    assert seen and all(0 <= done <= total for done, total, _ in seen if total)


# ----- independent references ---------------------------------------------------------------


def _numpy_power(model, kt):
    """Power from a numpy solve of the generator (rates from the model file and LDB)."""
    data = model.to_dict()
    names = [s["name"] for s in data["state"]]
    energy = {s["name"]: s.get("energy", 0.0) / kt for s in data["state"]}
    n = len(names)
    q = np.zeros((n, n))
    channels = []
    for t in data["transition"]:
        a, b = names.index(t["from"]), names.index(t["to"])
        f = t["forward"]
        work = t.get("work", 0.0) / kt
        if "backward" in t:
            r = t["backward"]
        else:
            r = f * math.exp(-(energy[t["from"]] - energy[t["to"]] + t["drive"] / kt - work))
        q[a, b] += f
        q[b, a] += r
        channels.append((a, b, f, r, work * kt))
    q -= np.diag(q.sum(axis=1))
    system = q.T.copy()
    system[-1, :] = 1.0
    rhs = np.zeros(n)
    rhs[-1] = 1.0
    p = np.linalg.solve(system, rhs)
    return sum(w * (p[a] * f - p[b] * r) for a, b, f, r, w in channels)


@pytest.mark.parametrize("seed", range(12))
def test_steady_state_matches_numpy_on_random_models(seed):
    """Reference: numpy.linalg.solve of Q^T p = 0 with sum(p) = 1 (Q the rate matrix)."""
    scipy_linalg = pytest.importorskip("scipy.linalg")
    rng = np.random.default_rng(100 + seed)
    n = int(rng.integers(3, 30))
    model = chorded_ring(n, 100 + seed)
    data = model.to_dict()
    names = [s["name"] for s in data["state"]]
    q = np.zeros((n, n))
    for t in data["transition"]:
        a, b = names.index(t["from"]), names.index(t["to"])
        e = {s["name"]: s.get("energy", 0.0) for s in data["state"]}
        back = t["forward"] * math.exp(-(e[t["from"]] - e[t["to"]] + t["drive"] - t.get("work", 0.0)))
        q[a, b] += t["forward"]
        q[b, a] += back
    q -= np.diag(q.sum(axis=1))
    null = scipy_linalg.null_space(q.T)[:, 0]
    reference = null / null.sum()
    ours = model.steady()
    np.testing.assert_allclose(ours.probabilities, reference, rtol=1e-9, atol=1e-15)
    assert ours.power == pytest.approx(_numpy_power(model, 1.0), rel=1e-9, abs=1e-12)


def test_bound_matches_the_committed_cvxpy_fixtures(at_root):
    """Reference: tests/fixtures/reference/*.json, the bound by cvxpy with Clarabel
    (scripts/reference.py), kept to 7 significant digits; only 'optimal' solves are used."""
    compared = 0
    for fixture in sorted((ROOT / "tests" / "fixtures" / "reference").glob("*.json")):
        data = json.loads(fixture.read_text())
        reference = data["bound_cvxpy"]
        if not reference.get("finite") or reference.get("status") != "optimal":
            continue
        model = ergopath.load(data["model"])
        if "@" in model.states[0]:
            # The fixture's bound lets pathways cross environment states, which the package
            # (like the CLI) refuses: added pathways never change the environment.
            continue
        kt = model._core.kt
        ours = model.bound(pairs="all").to_dict()["bound"]["power"] / kt
        assert ours == pytest.approx(reference["value_kT"], rel=1e-6), fixture.name
        compared += 1
    assert compared >= 7


def test_messages_name_keyword_arguments_not_flags():
    model = ergopath.Model.from_toml(RING, "ring")
    with pytest.raises(ergopath.UsageError) as raised:
        model.design(max_pathways=0)
    assert "max_pathways 0" in str(raised.value) and "--" not in str(raised.value)


def test_the_certified_bound_alone_equals_the_bound_job(at_root):
    for path in SHIPPED:
        model = ergopath.load(path)
        alone = model.certified_bound()
        job = model.bound().to_dict()
        assert alone.power == job["bound"]["power"]
        assert alone.certified_upper == job["bound"]["certified_upper"]
        assert alone.headroom == pytest.approx(job["bound"]["headroom"], rel=1e-12)
        assert alone.probabilities.sum() == pytest.approx(1.0, rel=1e-9)
