"""Every CSV table loads into Python's csv module without cleaning: one header row, a unit
``[unit]`` on every dimensional column, every data cell a float (or an allowed label or empty
cell), and numbers in the one format of ``report::csv`` (shortest round-trip digits, at most 17
significant digits, never round-off tails such as 0.9999999999999999).

Two sources: every ``*.csv`` the demo committed under ``results/`` (its model folders and
``results/compare``; ``results/bench`` is written by benchmark runs instead, and is covered by a
small fresh ``bench`` run here), and the ``--csv`` output of every command and table, run here.
"""

import csv
import io
import pathlib
import re
import subprocess

import pytest

from conftest import ROOT, _binary

# Columns of dimensionless numbers: counts, indices, shares, ratios, probabilities, flags.
DIMENSIONLESS = {
    "index", "rank", "sample", "states", "max_pathways", "sets", "optimised", "pruned",
    "evaluations", "newton_steps", "sets_scored", "probability", "baseline_probability",
    "optimal_probability", "optimal_ln_probability", "fraction_of_headroom",
    "best_fraction_of_headroom", "attaining_fraction_of_headroom",
    "capped_fraction_of_headroom", "target_fraction", "relative_gap", "relative_residual",
    "shift", "scale", "near_equilibrium_error", "strong_drive_error", "uncertainty_product",
    "uncertainty_product_roundoff", "power_elasticity", "bound_elasticity", "quantile",
    "max_pathways", "ratio", "runs", "jumps",
}
# Columns of text: names, labels, verdicts, reasons.
LABELS = {
    "from", "to", "label", "state", "cycle", "title", "file", "kind", "name", "parameter_unit",
    "regime", "predicted_regime", "route", "design", "pathways", "carried_over",
    "upper_bound_missing", "failure", "family", "method", "refused", "task", "their_outcome",
    "basis", "implied", "power_inside", "diffusion_inside",
}
# Columns of values that are set (grids, caps, levels), never computed by a solver.
SET_VALUES = {
    "rate_cap", "total_rate", "work_limit", "max_pathways", "scale", "quantile",
    "target_fraction",
}
# Label values allowed in otherwise numeric columns.
LABEL_VALUES = {"nominal"}

NUMBER = re.compile(r"^-?(0|[1-9][0-9]*)(\.[0-9]+)?(e-?[0-9]+)?$|^(-?inf|nan)$")


def significant_digits(cell):
    mantissa = cell.split("e")[0].lstrip("-").replace(".", "")
    return len(mantissa.lstrip("0"))


def check_table(text, label):
    rows = list(csv.reader(io.StringIO(text)))
    assert rows, f"{label}: empty"
    header, body = rows[0], rows[1:]
    assert len(set(header)) == len(header), f"{label}: repeated column in {header}"
    for name in header:
        base = name.split(" [")[0]
        if name.endswith("]"):
            assert re.fullmatch(r"[a-z_]+ \[[^\[\]]+\]", name), f"{label}: header cell {name!r}"
            continue
        assert name in DIMENSIONLESS or name in LABELS or name == "max_pathways", (
            f"{label}: column {name!r} has no [unit] and is not a known dimensionless or label "
            "column"
        )
        assert base == name
    for r, row in enumerate(body, start=2):
        assert len(row) == len(header), f"{label}:{r}: {len(row)} cells for {len(header)} columns"
        for name, cell in zip(header, row):
            if name in LABELS or cell == "":
                continue
            if cell in LABEL_VALUES:
                continue
            assert NUMBER.match(cell), f"{label}:{r}: {name} = {cell!r} is not a number as written"
            value = float(cell)
            assert significant_digits(cell) <= 17, f"{label}:{r}: {cell!r}: too many digits"
            # A positional number has no run of zeros standing in for an exponent.
            if "e" not in cell and value != 0:
                assert 1e-4 <= abs(value) < 1e15, f"{label}:{r}: {cell!r} should be scientific"
            # Round-off tails of a value meant to be round: 16-17 digits that are a run of
            # nines (0.9999999999999999, 999.9999999999995) or zeros and a last digit
            # (0.30000000000000004). Checked on the values that are set, not computed (grid
            # points, caps, quantile levels): a computed figure may lie one unit in the last
            # place from a round number (an optimised rate at its cap, 10.000000000000002).
            if name.split(" [")[0] not in SET_VALUES:
                continue
            digits = cell.split("e")[0].lstrip("-").replace(".", "").lstrip("0")
            assert not re.search(r"9{13,}[0-9]{0,2}$|0{13,}[1-9]$", digits), (
                f"{label}:{r}: {name} = {cell!r} carries a round-off tail"
            )
    return header, body


def demo_tables():
    results = ROOT / "results"
    return sorted(p for p in results.glob("*/*.csv") if p.parent.name != "bench")


@pytest.mark.parametrize("path", demo_tables(), ids=lambda p: f"{p.parent.name}/{p.name}")
def test_every_demo_table_reads_with_units(path):
    header, body = check_table(path.read_text(), str(path.relative_to(ROOT)))
    assert body, f"{path}: no rows"


def test_the_demo_wrote_every_table():
    names = {p.name for p in (ROOT / "results" / "walker").glob("*.csv")}
    for name in [
        "steady.csv", "steady-states.csv", "steady-cycles.csv", "bound.csv",
        "bound-states.csv", "bound-pathways.csv", "bound-speed.csv", "design.csv",
        "design-ranking.csv", "design-precision.csv", "sweep-rate-cap.csv",
        "frontier-rate-cap.csv", "sensitivity.csv", "regimes-stored.csv", "uncertainty.csv",
        "uncertainty-quantiles.csv",
    ]:
        assert name in names, name
    assert (ROOT / "results" / "compare" / "compare.csv").is_file()


def test_sweep_grid_values_are_written_exactly():
    rows = list(csv.DictReader(open(ROOT / "results" / "walker" / "sweep-rate-cap.csv")))
    column = "rate_cap [1/s]"
    values = [row[column] for row in rows]
    assert values[0] == "1" and values[6] == "1000" and values[-1] == "1000000"
    assert values[1] == "3.1622776601683795"


def run(*args, cwd=ROOT):
    done = subprocess.run(
        [str(_binary()), *map(str, args)], cwd=cwd, capture_output=True, text=True, timeout=600
    )
    assert done.returncode == 0, done.stderr
    return done.stdout


WALKER = "problems/walker.toml"
COMMANDS = [
    (["check", "problems/flicker.toml"], ["states", "transitions", "cycles"]),
    (["steady", WALKER], ["transitions", "states", "cycles"]),
    (["bound", WALKER, "--rate-cap", "1000"], ["summary", "states", "pathways", "speed"]),
    (["sensitivity", WALKER], ["parameters"]),
    (["regimes", WALKER, "--scale", "stored", "--points", "3"], ["scales"]),
    (["design", WALKER, "--max-pathways", "1", "--top", "3", "--quiet"],
     ["pathways", "ranking", "precision"]),
    (["sweep", WALKER, "--over", "rate-cap=1..1e3", "--points", "4", "--max-pathways", "1",
      "--quiet"], ["budgets"]),
    (["compare", WALKER, "problems/ring6.toml", "--rate-cap", "10", "--max-pathways", "1",
      "--quiet"], ["ranking"]),
    (["uncertainty", WALKER, "--samples", "20", "--quiet"], ["samples", "quantiles"]),
    (["simulate", WALKER, "--time", "5", "--runs", "50", "--quiet"], ["estimates"]),
]


@pytest.mark.parametrize("command,tables", COMMANDS, ids=[c[0][0] for c in COMMANDS])
def test_every_command_prints_every_table_with_units(command, tables):
    first = run(*command, "--csv")
    for i, table in enumerate(tables):
        text = run(*command, f"--csv={table}")
        if i == 0:
            assert text == first, f"{command[0]}: --csv is not its first table, {table}"
        check_table(text, f"{command[0]} --csv={table}")
    done = subprocess.run([str(_binary()), *command, "--csv=no-such"], cwd=ROOT,
                          capture_output=True, text=True)
    assert done.returncode == 2


def test_the_units_follow_the_model(tmp_path):
    # A model in kJ/mol and ms: rates per ms, powers in its power unit.
    header, _ = check_table(run("steady", "problems/photoswitch.toml", "--csv"), "photoswitch")
    assert any(h.startswith("flux [1/") for h in header)
    header, _ = check_table(run("bound", WALKER, "--csv"), "bound")
    assert "bound [pN nm/s]" in header and "headroom [pN nm/s]" in header


def test_bench_tables_read_with_units(tmp_path):
    run("bench", "--sizes", "100", "--bound-sizes", "100", "--runs", "1", "--design-states", "8",
        "--design-k", "1", "--out", tmp_path)
    for name in ["steady.csv", "bound.csv", "design.csv"]:
        header, body = check_table((tmp_path / name).read_text(), name)
        assert "median [s]" in header and body
