"""report.html in a real browser: headless Chromium loads the page a save wrote, runs its inline
script (sorting a table from the address's ``#sort=TABLE:COLUMN:asc|desc``) and dumps the DOM,
which is parsed here and compared with the JSON and CSV files of the same folder. Console
errors and uncaught exceptions fail the test, as does a page whose script did not finish
(``data-ready``) or recorded an error (``data-error``).

Skips when no Chromium is installed, unless ``ERGOPATH_REQUIRE_BROWSER=1`` (CI), where a missing
browser or binary fails instead."""

import csv
import html.parser
import io
import json
import os
import shutil
import struct
import subprocess
import time

import pytest

from conftest import ROOT, _binary

REQUIRED = os.environ.get("ERGOPATH_REQUIRE_BROWSER") == "1"
HOSTILE = "<script>alert(1)</script> & \"quoted\" 'single' </title>"


def _need(what, found):
    if found:
        return found
    if REQUIRED:
        pytest.fail(f"{what} is missing and ERGOPATH_REQUIRE_BROWSER=1")
    pytest.skip(f"{what} is missing (install chromium to run the browser test)")


def _chromium():
    return _need(
        "chromium",
        next(
            (p for p in map(shutil.which, ("chromium", "chromium-browser", "google-chrome")) if p),
            None,
        ),
    )


class Page(html.parser.HTMLParser):
    """The body's attributes, the first h1's text, and every table by id: header cells and
    rows of ``(text, data-v)`` cells."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.body = {}
        self.h1 = None
        self.tables = {}
        self.table_attrs = {}
        self._table = None
        self._row = None
        self._cell = None
        self._in_h1 = False
        self._in_head = False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "body":
            self.body = a
        elif tag == "h1" and self.h1 is None:
            self._in_h1, self.h1 = True, ""
        elif tag == "table":
            self._table = a.get("id")
            self.tables[self._table] = {"header": [], "rows": []}
            self.table_attrs[self._table] = a
        elif tag == "thead":
            self._in_head = True
        elif tag == "tr" and self._table is not None:
            self._row = []
        elif tag in ("td", "th") and self._row is not None:
            self._cell = ["", a.get("data-v")]

    def handle_endtag(self, tag):
        if tag == "h1":
            self._in_h1 = False
        elif tag in ("td", "th") and self._cell is not None:
            self._row.append(tuple(self._cell))
            self._cell = None
        elif tag == "tr" and self._row is not None:
            t = self.tables[self._table]
            if self._in_head:
                t["header"].extend(text for text, _ in self._row)
            else:
                t["rows"].append(self._row)
            self._row = None
        elif tag == "thead":
            self._in_head = False
        elif tag == "table":
            self._table = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell[0] += data
        if self._in_h1:
            self.h1 += data


def _load(chromium, page, fragment, tmp_path):
    """The DOM of ``page`` after its script ran, and Chromium's standard error."""
    done = subprocess.run(
        [
            chromium,
            "--headless=new",
            "--disable-gpu",
            "--no-sandbox",
            "--no-first-run",
            f"--user-data-dir={tmp_path / 'profile'}",
            "--enable-logging=stderr",
            "--v=0",
            "--dump-dom",
            page.as_uri() + fragment,
        ],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr[-3000:]
    console = [
        line for line in done.stderr.splitlines() if "CONSOLE" in line or "Uncaught" in line
    ]
    assert not console, "\n".join(console)
    parsed = Page()
    parsed.feed(done.stdout)
    assert parsed.body.get("data-ready") == "1", f"the page's script did not finish: {parsed.body}"
    assert "data-error" not in parsed.body, parsed.body["data-error"]
    return parsed


@pytest.fixture(scope="module")
def saved(tmp_path_factory):
    """A results folder written by the CLI for the walker under a hostile title."""
    binary = _need("the ergopath binary", _built())
    work = tmp_path_factory.mktemp("html")
    text = (ROOT / "problems/walker.toml").read_text()
    title = HOSTILE.replace("\\", "\\\\").replace('"', '\\"')
    text = text.replace('title = "fuel-driven walker under a 2 pN load"', f'title = "{title}"')
    assert HOSTILE.split()[0] not in (ROOT / "problems/walker.toml").read_text()
    (work / "walker.toml").write_text(text)
    for args in (["steady"], ["bound"], ["sensitivity"]):
        done = subprocess.run(
            [str(binary), *args, "walker.toml", "--save"], cwd=work, capture_output=True, text=True
        )
        assert done.returncode == 0, done.stderr
    assert "report.html" in done.stdout
    return work / "results" / "walker"


def _built():
    """The CLI binary, or None where there is none (conftest's helper skips then)."""
    try:
        return _binary()
    except pytest.skip.Exception:
        return None


def test_the_page_runs_sorts_and_shows_the_saved_numbers(saved, tmp_path):
    chromium = _chromium()
    page = saved / "report.html"
    source = page.read_text()
    assert "<script>alert(1)</script>" not in source
    started = time.monotonic()
    dom = _load(chromium, page, "#sort=model-states:1:desc", tmp_path)
    elapsed = time.monotonic() - started
    print(f"chromium --dump-dom: {elapsed:.2f} s for {len(source)} bytes")
    # The hostile title is text on the page, never markup.
    assert dom.h1 == f"Results: {HOSTILE}"

    steady = json.loads((saved / "steady.json").read_text())
    states = dom.tables["model-states"]
    assert states["header"] == ["name", "probability"]
    assert dom.table_attrs["model-states"].get("data-sorted") == "1:desc"
    shown = [(row[0][0], float(row[1][1])) for row in states["rows"]]
    # Sorted by probability, largest first, by the script.
    assert [p for _, p in shown] == sorted((p for _, p in shown), reverse=True)
    assert dict(shown) == {s["name"]: s["probability"] for s in steady["states"]}
    assert len(shown) == len(steady["states"])

    # The steady table is the CSV, cell for cell (numbers as written, in data-v).
    rows = list(csv.reader(io.StringIO((saved / "steady.csv").read_text())))
    table = dom.tables["steady-table"]
    assert table["header"] == rows[0]
    cells = [[v if v is not None else t for t, v in row] for row in table["rows"]]
    assert cells == rows[1:]
    # ... and the JSON: fluxes of every transition.
    flux = next(i for i, h in enumerate(rows[0]) if h.startswith("flux ["))
    fluxes = [float(row[flux]) for row in cells]
    assert fluxes == [t["flux"] for t in steady["transitions"]]

    # The bound's headroom and certified upper value in its key figures equal bound.json.
    bound = json.loads((saved / "bound.json").read_text())
    figures = {row[0][0]: row[1] for row in dom.tables["bound-figures"]["rows"]}
    for key in ("headroom", "certified_upper", "power"):
        text, value = figures[f"bound.{key}"]
        assert float(value) == bound["bound"][key]
        assert abs(float(text) - bound["bound"][key]) <= 1e-4 * abs(bound["bound"][key])

    # Sorting a text column ascending, by a second load.
    dom = _load(chromium, page, "#sort=steady-table:1:asc", tmp_path)
    names = [row[1][0] for row in dom.tables["steady-table"]["rows"]]
    assert names == sorted(names)


def test_a_screenshot_is_drawn(saved, tmp_path):
    chromium = _chromium()
    shot = tmp_path / "page.png"
    done = subprocess.run(
        [
            chromium,
            "--headless=new",
            "--disable-gpu",
            "--no-sandbox",
            "--no-first-run",
            f"--user-data-dir={tmp_path / 'profile'}",
            "--hide-scrollbars",
            "--window-size=1200,2400",
            f"--screenshot={shot}",
            (saved / "report.html").as_uri(),
        ],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr[-3000:]
    data = shot.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    width, height = struct.unpack(">II", data[16:24])
    assert (width, height) == (1200, 2400)
    assert len(data) > 20_000, "an empty page"
