"""ergopath from Python: harvesting power of Markov jump networks, its universal bound under
added pathways, and designs that attain it.

Every job of the command-line tool runs here on a model in memory, with no files written
unless ``save=`` names a results folder. Each result's ``to_dict()`` equals the CLI's ``--json``
output for the same model and settings; arrays are numpy arrays and ``to_frame()`` gives a
pandas DataFrame (pandas is optional). Long jobs release the GIL, run on ``threads`` worker
threads, report progress to an optional callable, and stop cleanly on Ctrl-C
(KeyboardInterrupt). Numbers carry the same round-off bounds as the CLI's; see the
model-format reference (``ergopath.reference()``) for every key.

    >>> import ergopath
    >>> ring = ergopath.load("problems/ring6.toml")
    >>> ring.steady().power            # doctest: +SKIP
    >>> ring.bound().headroom          # doctest: +SKIP
"""

from __future__ import annotations

import copy
import json
import math
import os
import sys
from typing import Any, Callable, Dict, Iterable, List, Mapping, Optional, Sequence, Tuple, Union

import numpy as np

from . import _core
from ._core import ModelError, SolveError, UsageError

__version__ = _core.__version__

__all__ = [
    "Model",
    "Report",
    "Steady",
    "CertifiedBound",
    "Diagram",
    "load",
    "compare",
    "reference",
    "ModelError",
    "UsageError",
    "SolveError",
]

#: A budget value: a number in the model's own unit, or text with a unit ("1000/s", "4kT").
Budget = Union[float, int, str]
#: A progress callback: ``progress(done, total, what)``; or True for a line on standard error.
Progress = Union[bool, Callable[[int, int, str], None], None]
#: A transition: its index in file order, its label, or its ``(from, to)`` state names.
TransitionKey = Union[int, str, Tuple[str, str]]

_TABLE_ORDER = ("state", "transition", "environment", "switch")


def reference() -> str:
    """The complete model-file and JSON reference (the text of ``ergopath reference``)."""
    return _core.reference()


def load(path: Union[str, os.PathLike]) -> "Model":
    """Reads and validates a model file (TOML). Raises :class:`ModelError` with the file, the
    line and column, the problem and the fix when the file is refused."""
    return Model.load(path)


def _plain(value: Any) -> Any:
    """Python data from numpy scalars and arrays, for the model's TOML form."""
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in value.items() if not _missing(v)}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    return value


def _missing(value: Any) -> bool:
    """A cell left empty in a table (None or NaN): the key is left out of the model."""
    if value is None:
        return True
    try:
        return isinstance(value, (float, np.floating)) and math.isnan(value)
    except TypeError:
        return False


def _records(rows: Any, what: str) -> List[Dict[str, Any]]:
    """Rows as a list of dicts: from a list of dicts, a dict of columns, or a DataFrame."""
    if hasattr(rows, "to_dict") and hasattr(rows, "columns"):
        rows = rows.to_dict("records")
    if isinstance(rows, Mapping):
        columns = {k: list(_plain(v)) for k, v in rows.items()}
        lengths = {len(v) for v in columns.values()}
        if len(lengths) > 1:
            raise UsageError(
                f"{what}: the columns have different lengths {sorted(lengths)}; give columns of one length"
            )
        count = lengths.pop() if lengths else 0
        rows = [{k: v[i] for k, v in columns.items()} for i in range(count)]
    return [_plain(dict(r)) for r in rows]


class Model:
    """A validated model (immutable). Build one with :func:`load`, :meth:`from_toml`,
    :meth:`from_dict` or :meth:`build`; the ``with_*`` methods return edited copies."""

    __slots__ = ("_core",)

    def __init__(self, core: "_core.CoreModel") -> None:
        self._core = core

    # ----- construction -------------------------------------------------------------------

    @classmethod
    def load(cls, path: Union[str, os.PathLike]) -> "Model":
        """Reads and validates a model file; see :func:`load`."""
        return cls(_core.CoreModel.load(os.fspath(path)))

    @classmethod
    def from_toml(cls, text: str, name: str = "model") -> "Model":
        """Validates model-file text; ``name`` stands for the file in messages and names the
        results folder when a job is saved."""
        return cls(_core.CoreModel.from_toml(text, name))

    @classmethod
    def from_dict(cls, data: Mapping[str, Any], name: str = "model") -> "Model":
        """A model from the data of a model file as a dict (the keys of the model-format
        reference: ``state``, ``transition``, ``pathways``, ...), e.g. from :meth:`to_dict`."""
        plain = _plain(data)
        ordered = {k: v for k, v in plain.items() if k not in _TABLE_ORDER}
        ordered.update({k: plain[k] for k in _TABLE_ORDER if k in plain})
        text = _core.json_to_toml(json.dumps(ordered, allow_nan=True))
        return cls.from_toml(text, name)

    @classmethod
    def build(
        cls,
        states: Sequence[str],
        transitions: Any,
        *,
        energies: Optional[Sequence[float]] = None,
        title: Optional[str] = None,
        energy_unit: str = "kT",
        time_unit: str = "s",
        temperature: Optional[float] = None,
        pathways: Optional[Mapping[str, Any]] = None,
        environments: Optional[Sequence[str]] = None,
        switches: Any = None,
        name: str = "model",
    ) -> "Model":
        """A model from Python data.

        ``states`` are the state names and ``energies`` their free energies (default 0) in
        ``energy_unit``. ``transitions`` is a list of dicts, a dict of equal-length columns
        (lists or numpy arrays) or a pandas DataFrame, with the model file's transition keys:
        ``from``, ``to``, ``forward`` and at least one of ``backward`` and ``drive``; optional
        ``work``, ``label``, ``environments``. Empty cells (None, NaN) are left out.
        ``switches`` (with ``environments``) takes ``from``, ``to``, ``forward``, ``backward``.
        """
        names = [str(s) for s in states]
        if energies is not None and len(energies) != len(names):
            raise UsageError(
                f"energies: {len(energies)} values for {len(names)} states; give one energy per state"
            )
        state_rows = [
            {"name": n} if energies is None else {"name": n, "energy": _plain(e)}
            for n, e in zip(names, energies if energies is not None else names)
        ]
        data: Dict[str, Any] = {"energy_unit": energy_unit, "time_unit": time_unit}
        if title is not None:
            data["title"] = title
        if temperature is not None:
            data["temperature"] = float(temperature)
        if pathways is not None:
            data["pathways"] = _plain(dict(pathways))
        data["state"] = state_rows
        data["transition"] = _records(transitions, "transitions")
        if environments is not None:
            data["environment"] = [{"name": str(e)} for e in environments]
        if switches is not None:
            data["switch"] = _records(switches, "switches")
        return cls.from_dict(data, name)

    # ----- what it is ---------------------------------------------------------------------

    @property
    def toml(self) -> str:
        """The model-file text the model was read from."""
        return self._core.toml

    @property
    def title(self) -> str:
        return self._core.title

    @property
    def source(self) -> str:
        """The file (or the name given) the model came from."""
        return self._core.source

    @property
    def states(self) -> List[str]:
        """State names of the network solved (``state@environment`` with environments)."""
        return self._core.states

    @property
    def units(self) -> Dict[str, Any]:
        """``energy``, ``time``, ``power`` unit names and ``temperature`` in kelvin."""
        energy, time, power, temperature = self._core.units
        return {"energy": energy, "time": time, "power": power, "temperature": temperature}

    def to_dict(self) -> Dict[str, Any]:
        """The model file's data as a dict (edit it and give it to :meth:`from_dict`)."""
        return json.loads(_core.toml_to_json(self.toml))

    def __repr__(self) -> str:
        return f"<ergopath.Model {self.title!r}: {len(self.states)} states>"

    # ----- edited copies ------------------------------------------------------------------

    def _transition_index(self, data: Dict[str, Any], key: TransitionKey) -> int:
        rows = data.get("transition", [])
        if isinstance(key, int) and not isinstance(key, bool):
            if not 0 <= key < len(rows):
                raise UsageError(
                    f"transition {key}: the model has transitions 0..{len(rows) - 1} (file order)"
                )
            return key
        if isinstance(key, str):
            found = [i for i, r in enumerate(rows) if r.get("label") == key]
        else:
            a, b = key
            found = [i for i, r in enumerate(rows) if (r.get("from"), r.get("to")) == (a, b)]
        if len(found) != 1:
            what = "no" if not found else f"{len(found)}"
            raise UsageError(
                f"transition {key!r}: {what} transitions match; give its index in file order, a unique label, or (from, to)"
            )
        return found[0]

    def _edited(self, data: Dict[str, Any]) -> "Model":
        return Model.from_dict(data, self.source)

    def with_rate_scaled(self, transition: TransitionKey, factor: float) -> "Model":
        """A copy with a transition's forward rate times ``factor`` at fixed affinity (its
        backward rate scales with it, so its drive and work stay)."""
        if not (factor > 0 and math.isfinite(factor)):
            raise UsageError(f"factor {factor}: give a positive finite number")
        data = self.to_dict()
        row = data["transition"][self._transition_index(data, transition)]
        row["forward"] = row["forward"] * factor
        if "backward" in row:
            row["backward"] = row["backward"] * factor
        return self._edited(data)

    def with_work(self, transition: TransitionKey, work: float) -> "Model":
        """A copy with a transition's work per forward jump set to ``work`` (energy unit) at
        fixed drive: the backward rate follows from local detailed balance."""
        data = self.to_dict()
        row = data["transition"][self._transition_index(data, transition)]
        before = row.get("work", 0.0)
        row["work"] = float(work)
        if "backward" in row and "drive" not in row:
            # The drive the file implies stays: ln(f/b) falls by the added work in kT.
            row["backward"] = row["backward"] * math.exp((float(work) - before) / self._core.kt)
        return self._edited(data)

    def with_energy(self, state: str, energy: float) -> "Model":
        """A copy with a state's free energy set (energy unit); rates written in the file are
        kept, and backward rates written as drives follow from local detailed balance."""
        data = self.to_dict()
        rows = [r for r in data.get("state", []) if r.get("name") == state]
        if not rows:
            raise UsageError(f"state {state!r}: no such state; give one of {self.to_dict_states()}")
        rows[0]["energy"] = float(energy)
        return self._edited(data)

    def to_dict_states(self) -> List[str]:
        """The system state names as written in the file."""
        return [r["name"] for r in self.to_dict().get("state", [])]

    # ----- jobs ---------------------------------------------------------------------------

    def steady(self) -> "Steady":
        """The steady state and power budget (fast: the full report is built on first use of
        ``to_dict()``, ``to_frame()`` or ``text``)."""
        return Steady(self)

    def bound(
        self,
        *,
        pairs: Optional[Union[str, Iterable[Tuple[str, str]]]] = None,
        rate_cap: Optional[Budget] = None,
        target: float = 0.99,
        save: Optional[Union[str, os.PathLike]] = None,
    ) -> "Report":
        """The certified universal bound, its attaining design, the speed table and (with
        ``rate_cap``) the exact rate-capped design. ``pairs`` (``"all"`` or a list of state-name
        pairs; default: the model's ``[pathways] pairs``) says where added pathways may act."""
        return _run("bound", [self], dict(pairs=_pairs(pairs), rate_cap=rate_cap, target=target), save)

    def certified_bound(
        self, *, pairs: Optional[Union[str, Iterable[Tuple[str, str]]]] = None
    ) -> "CertifiedBound":
        """The certified universal bound alone, without the attaining design, tables or
        report (the fast path of parameter scans); :meth:`bound` gives everything."""
        given = _pairs(pairs)
        text = None if given is None else given if given == "all" else ",".join(f"{a}/{b}" for a, b in given)
        return CertifiedBound(*self._core.certified_bound(text))

    def design(
        self,
        *,
        max_pathways: Optional[int] = None,
        rate_cap: Optional[Budget] = None,
        total_rate: Optional[Budget] = None,
        work_limit: Optional[Budget] = None,
        pairs: Optional[Union[str, Iterable[Tuple[str, str]]]] = None,
        top: int = 10,
        starts: int = 2,
        seed: int = 1,
        beam_width: int = 48,
        exhaustive_limit: Optional[int] = None,
        blind: bool = False,
        max_fano: Optional[float] = None,
        samples: Optional[int] = None,
        quantile: float = 0.05,
        threads: int = 0,
        progress: Progress = None,
        save: Optional[Union[str, os.PathLike]] = None,
    ) -> "Report":
        """Ranked designs (sets of added pathways with their rates) within the budget, each
        verified by an independent steady-state solve. ``threads=0`` uses one per core. With
        ``samples``, the designs are also ranked by the ``quantile`` of their power over that
        many networks sampled from the model's uncertainty (key ``uncertainty``)."""
        settings = dict(
            max_pathways=max_pathways,
            rate_cap=rate_cap,
            total_rate=total_rate,
            work_limit=work_limit,
            pairs=_pairs(pairs),
            top=top,
            starts=starts,
            seed=seed,
            beam_width=beam_width,
            exhaustive_limit=exhaustive_limit,
            blind=blind,
            max_fano=max_fano,
            samples=samples,
            quantile=quantile if samples is not None else None,
            threads=threads,
        )
        return _run("design", [self], settings, save, progress)

    def uncertainty(
        self,
        samples: int = 1000,
        *,
        seed: int = 1,
        pairs: Optional[Union[str, Iterable[Tuple[str, str]]]] = None,
        threads: int = 0,
        progress: Progress = None,
        save: Optional[Union[str, os.PathLike]] = None,
    ) -> "Report":
        """Quantiles (5, 25, 50, 75, 95%) of the baseline power, the bound and the headroom
        over networks sampled from the uncertainties the model file gives (``rate_uncertainty``,
        ``energy_uncertainty``), each with a distribution-free 95% interval; ``values`` holds
        every sample's three figures."""
        settings = dict(samples=samples, seed=seed, pairs=_pairs(pairs), threads=threads)
        return _run("uncertainty", [self], settings, save, progress)

    def sweep(
        self,
        over: str,
        start: float,
        stop: float,
        *,
        points: int = 13,
        max_pathways: Optional[int] = None,
        rate_cap: Optional[Budget] = None,
        total_rate: Optional[Budget] = None,
        work_limit: Optional[Budget] = None,
        pairs: Optional[Union[str, Iterable[Tuple[str, str]]]] = None,
        starts: int = 2,
        seed: int = 1,
        beam_width: int = 48,
        blind: bool = False,
        threads: int = 0,
        progress: Progress = None,
        save: Optional[Union[str, os.PathLike]] = None,
    ) -> "Report":
        """The best design at each value of one budget quantity (``over``: ``rate_cap``,
        ``total_rate``, ``max_pathways`` or ``work_limit``) from ``start`` to ``stop`` (in the
        model's units), beside the universal bound."""
        name = over.replace("_", "-")
        settings = dict(
            over=f"{name}={start!r}..{stop!r}",
            points=points,
            max_pathways=max_pathways,
            rate_cap=rate_cap,
            total_rate=total_rate,
            work_limit=work_limit,
            pairs=_pairs(pairs),
            starts=starts,
            seed=seed,
            beam_width=beam_width,
            blind=blind,
            threads=threads,
        )
        return _run("sweep", [self], settings, save, progress)

    def regimes(
        self,
        scale: str = "stored",
        start: float = 0.01,
        stop: float = 1000.0,
        *,
        points: int = 11,
        progress: Progress = None,
        save: Optional[Union[str, os.PathLike]] = None,
    ) -> "Report":
        """The exact headroom beside its closed forms along a scaling of the labels
        (``scale``: ``work``, ``drive``, ``energies``, a comma list of them, or ``stored``)."""
        settings = {"scale": scale, "from": start, "to": stop, "points": points}
        return _run("regimes", [self], settings, save, progress)

    def sensitivity(
        self, *, threads: int = 0, save: Optional[Union[str, os.PathLike]] = None
    ) -> "Report":
        """Derivatives of the baseline power and of the bound with respect to every
        parameter, ranked by their effect on the headroom."""
        return _run("sensitivity", [self], {"threads": threads}, save)

    def draw(
        self,
        of: Optional[str] = None,
        *,
        design: Optional[Union[str, os.PathLike]] = None,
        rank: int = 1,
        save: Optional[Union[str, os.PathLike]] = None,
    ) -> "Diagram":
        """A diagram of the network (``of``: ``baseline``, ``bound`` for the optimal
        distribution, ``design`` for the attaining design, or the design ranked ``rank`` in a
        saved ``design.json`` given as ``design``): node areas by probability, arrows along
        the net flux. Shows itself in a notebook; ``svg`` and ``dot`` hold both forms."""
        given = {"rank": rank}
        if of is not None:
            given["of"] = of
        if design is not None:
            given["design"] = os.fspath(design)

        def drawn(dot: bool, save_to: Optional[str] = None) -> str:
            return _core.run("draw", [self._core], json.dumps({**given, "dot": dot}), save_to, None)

        if save is not None:
            drawn(False, os.fspath(save))
        return Diagram(drawn(False), drawn(True))

    def simulate(
        self,
        time: float,
        *,
        runs: int = 1000,
        seed: int = 1,
        design: Optional[Union[str, os.PathLike]] = None,
        threads: int = 0,
        progress: Progress = None,
        save: Optional[Union[str, os.PathLike]] = None,
    ) -> "Report":
        """Gillespie runs of length ``time`` (model's time unit): the empirical mean power and
        diffusion with 99% intervals beside the exact values. ``design`` adds the pathways of
        a saved design.json or bound.json."""
        settings = dict(
            time=time,
            runs=runs,
            seed=seed,
            design=None if design is None else os.fspath(design),
            threads=threads,
        )
        return _run("simulate", [self], settings, save, progress)


def compare(
    models: Sequence[Model],
    *,
    max_pathways: Optional[int] = None,
    rate_cap: Optional[Budget] = None,
    total_rate: Optional[Budget] = None,
    work_limit: Optional[Budget] = None,
    starts: int = 2,
    seed: int = 1,
    threads: int = 0,
    progress: Progress = None,
    save: Optional[Union[str, os.PathLike]] = None,
) -> "Report":
    """Ranks alternative architectures by their bound and their best design at one budget.
    Bare numbers are refused when the models' units differ: give units ("20/s")."""
    settings = dict(
        max_pathways=max_pathways,
        rate_cap=rate_cap,
        total_rate=total_rate,
        work_limit=work_limit,
        starts=starts,
        seed=seed,
        threads=threads,
    )
    return _run("compare", list(models), settings, save, progress)


def _pairs(pairs: Optional[Union[str, Iterable[Tuple[str, str]]]]) -> Any:
    if pairs is None or pairs == "all":
        return pairs
    if isinstance(pairs, str):
        raise UsageError(f"pairs={pairs!r}: give 'all' or a list of (state, state) tuples")
    return [[str(a), str(b)] for a, b in pairs]


def _stderr_progress(done: int, total: int, what: str) -> None:
    sys.stderr.write(f"\r{what or 'working'}: {done}/{total}")
    sys.stderr.flush()


def _run(
    job: str,
    models: List[Model],
    settings: Dict[str, Any],
    save: Optional[Union[str, os.PathLike]],
    progress: Progress = None,
) -> "Report":
    for m in models:
        if not isinstance(m, Model):
            raise UsageError(f"{job}: {m!r} is not an ergopath.Model; load one with ergopath.load")
    given = {k: v for k, v in settings.items() if v is not None}
    callback = _stderr_progress if progress is True else (progress or None)
    forms = _core.run(
        job,
        [m._core for m in models],
        json.dumps(given),
        None if save is None else os.fspath(save),
        callback,
    )
    if progress is True:
        sys.stderr.write("\n")
    return _REPORTS.get(job, Report)(json.loads(forms))


def _arrayish(value: Any) -> Any:
    """A list of numbers as a numpy array; anything else as it is."""
    if (
        isinstance(value, list)
        and value
        and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value)
    ):
        return np.asarray(value, dtype=float)
    return value


class Report:
    """A job's result. Keys of its JSON form (the CLI's ``--json``; see
    :func:`reference`) read as attributes or items, lists of numbers as numpy arrays;
    ``to_dict()`` is the JSON form, ``text`` the CLI's report, ``csv`` and ``svg`` its first
    table and picture where the job has them, ``csv_tables`` every table by name."""

    #: The list of records :meth:`to_frame` turns into rows by default.
    table: Optional[str] = None

    def __init__(self, forms: Dict[str, Any]) -> None:
        self._forms = forms
        self._data = json.loads(forms["json"])

    def to_dict(self) -> Dict[str, Any]:
        """The JSON form, equal to the CLI's ``--json`` output (a fresh copy)."""
        return copy.deepcopy(self._data)

    @property
    def text(self) -> str:
        return self._forms["text"]

    @property
    def csv(self) -> Optional[str]:
        """The job's first table as CSV (the CLI's ``--csv``)."""
        return self._forms.get("csv")

    @property
    def csv_tables(self) -> Dict[str, str]:
        """Every table of the job as CSV by name (the CLI's ``--csv=NAME``), first table
        first."""
        return dict(self._forms.get("tables") or {})

    @property
    def svg(self) -> Optional[str]:
        return self._forms.get("svg")

    def keys(self) -> List[str]:
        return list(self._data)

    def __getitem__(self, key: str) -> Any:
        return _arrayish(self._data[key])

    def __getattr__(self, name: str) -> Any:
        data = self.__dict__.get("_data")
        if data is not None and name in data:
            return _arrayish(data[name])
        raise AttributeError(f"{type(self).__name__} has no key {name!r}; keys: {sorted(data or [])}")

    def __str__(self) -> str:
        return self.text

    def __repr__(self) -> str:
        return f"<ergopath.{type(self).__name__} of {self._data.get('title', '')!r}>"

    def to_frame(self, table: Optional[str] = None):
        """A pandas DataFrame of the records under ``table`` (default: the job's main
        table); nested values stay as Python objects."""
        try:
            import pandas as pd
        except ImportError as e:  # pragma: no cover - depends on the environment
            raise ImportError("to_frame() needs pandas: pip install pandas") from e
        key = table or self.table
        if key is None or key not in self._data:
            raise KeyError(f"no table {key!r}; give one of {self._tables()}")
        return pd.DataFrame(self._data[key])

    def _tables(self) -> List[str]:
        return [k for k, v in self._data.items() if isinstance(v, list) and v and isinstance(v[0], dict)]


class BoundReport(Report):
    table = "optimal_distribution"

    @property
    def headroom(self) -> float:
        """Most power any added pathways can add (certified), in the power unit."""
        return self._data["bound"]["headroom"]

    @property
    def optimal_probabilities(self) -> np.ndarray:
        return np.asarray([s["probability"] for s in self._data["optimal_distribution"]], dtype=float)


class DesignReport(Report):
    table = "designs"


class SweepReport(Report):
    table = "points"


class CompareReport(Report):
    table = "ranking"


class RegimesReport(Report):
    table = "points"


class SensitivityReport(Report):
    table = "parameters"


class UncertaintyReport(Report):
    table = None

    @property
    def samples_frame(self):
        """Every solved sample's baseline power, bound and headroom as a DataFrame."""
        import pandas as pd

        return pd.DataFrame(self._data["values"], columns=["baseline_power", "bound", "headroom"])


class SimulationReport(Report):
    table = None


_REPORTS = {
    "bound": BoundReport,
    "design": DesignReport,
    "sweep": SweepReport,
    "compare": CompareReport,
    "regimes": RegimesReport,
    "sensitivity": SensitivityReport,
    "simulate": SimulationReport,
    "uncertainty": UncertaintyReport,
    "steady": Report,
}


class CertifiedBound:
    """The universal bound on the harvesting power (model's power unit): ``power`` is attained
    by the tree design in the fast limit; the exact maximum lies between ``power`` and
    ``certified_upper`` (the certificate, round-off included). ``headroom`` is what added
    pathways can add to ``baseline_power``."""

    __slots__ = (
        "power",
        "certified_upper",
        "roundoff",
        "baseline_power",
        "baseline_roundoff",
        "relative_gap",
        "route",
        "log_probabilities",
    )

    def __init__(self, power, certified_upper, roundoff, baseline_power, baseline_roundoff, gap, route, log_p):
        self.power = power
        self.certified_upper = certified_upper
        self.roundoff = roundoff
        self.baseline_power = baseline_power
        self.baseline_roundoff = baseline_roundoff
        self.relative_gap = gap
        self.route = route
        #: ln p* of the optimal distribution (finite where p* is below the double range).
        self.log_probabilities = np.asarray(log_p)

    @property
    def headroom(self) -> float:
        return self.power - self.baseline_power

    @property
    def probabilities(self) -> np.ndarray:
        return np.exp(self.log_probabilities)

    def __repr__(self) -> str:
        return f"<ergopath.CertifiedBound power {self.power:.6g}, headroom {self.headroom:.6g}>"


class Diagram:
    """A network diagram: ``svg`` (shown inline by Jupyter) and ``dot`` (Graphviz's DOT
    language, for your own rendering)."""

    __slots__ = ("svg", "dot")

    def __init__(self, svg: str, dot: str) -> None:
        self.svg = svg
        self.dot = dot

    def _repr_svg_(self) -> str:
        return self.svg

    def __repr__(self) -> str:
        return f"<ergopath.Diagram: {len(self.svg)} bytes of SVG>"


class Steady:
    """The steady state of a model: the distribution and power budget at once (one solve),
    the full report (fluxes with round-off, cycles, fluctuations) on first use of
    :meth:`to_dict`, :meth:`to_frame` or :attr:`text`."""

    __slots__ = (
        "model",
        "probabilities",
        "power",
        "power_roundoff",
        "drive_power",
        "entropy_production",
        "relative_residual",
        "method",
        "_report",
    )

    def __init__(self, model: Model) -> None:
        (
            p,
            self.power,
            self.power_roundoff,
            self.drive_power,
            self.entropy_production,
            self.relative_residual,
            self.method,
        ) = model._core.steady_state()
        self.model = model
        #: Stationary probabilities in the order of ``model.states``.
        self.probabilities = np.asarray(p)
        self._report: Optional[Report] = None

    @property
    def states(self) -> List[str]:
        return self.model.states

    def report(self, save: Optional[Union[str, os.PathLike]] = None) -> Report:
        """The full steady report (as ``ergopath steady --json``); with ``save``, written."""
        if self._report is None or save is not None:
            self._report = _run("steady", [self.model], {}, save)
        return self._report

    def to_dict(self) -> Dict[str, Any]:
        return self.report().to_dict()

    @property
    def text(self) -> str:
        return self.report().text

    def to_frame(self, table: str = "states"):
        """``states`` (name, probability), ``transitions`` or ``cycles`` as a DataFrame."""
        return self.report().to_frame(table)

    def __repr__(self) -> str:
        return f"<ergopath.Steady of {self.model.title!r}: power {self.power:.6g} {self.model.units['power']}>"
