"""Typed results: the core's report as a dict (``.to_dict()``, the same content as the command
line's JSON), numpy arrays for samples and trials, matplotlib figures, notebook rendering."""

from __future__ import annotations

import html
import json
from typing import Any, Dict, List, Optional, Sequence, Tuple

import numpy as np

from . import _core

_NUMERIC_STATUS = ("status",)


def _trials_columns(trials: "Tuple[List[str], List[List[str]]]") -> Dict[str, np.ndarray]:
    """The trial CSV (header, rows of text, exactly the command line's trials.csv) as numpy
    columns: numbers as float64 (missing values NaN), `*_status` as text, `trial` and `cell`
    as int64."""
    header, rows = trials
    columns: Dict[str, np.ndarray] = {}
    for j, name in enumerate(header):
        values = [row[j] for row in rows]
        if name.endswith("_status"):
            columns[name] = np.array(values, dtype=str)
        elif name in ("trial", "cell"):
            columns[name] = np.array([int(v) for v in values], dtype=np.int64)
        else:
            columns[name] = np.array([float(v) if v != "" else np.nan for v in values])
    return columns


def _table_arrays(table: _core.Table) -> Dict[str, np.ndarray]:
    return {
        "time": np.frombuffer(table.times_bytes(), dtype="<f8"),
        "rv": np.frombuffer(table.velocities_bytes(), dtype="<f8"),
        "err": np.frombuffer(table.uncertainties_bytes(), dtype="<f8"),
        "instrument": np.array(table.instruments, dtype=str),
    }


class _Result:
    """Common parts: the report dict and the table it came from."""

    def __init__(self, report: Dict[str, Any], table: _core.Table) -> None:
        self._report = report
        self.table = table

    def to_dict(self) -> Dict[str, Any]:
        """The report as plain Python values: the same content as the command line's JSON."""
        return json.loads(json.dumps(self._report))

    def to_json(self, indent: Optional[int] = 2) -> str:
        """The report as JSON text."""
        return json.dumps(self._report, indent=indent)

    def __repr__(self) -> str:
        return f"<{type(self).__name__} of {self.table.source_name!r}>"


class _TrialsMixin:
    trials: Dict[str, np.ndarray]

    def trials_table(self) -> Any:
        """The trials as an astropy ``Table`` (needs astropy)."""
        from astropy.table import Table

        return Table(self.trials)

    def trials_frame(self) -> Any:
        """The trials as a pandas ``DataFrame`` (needs pandas)."""
        import pandas

        return pandas.DataFrame(self.trials)


class FitResult(_Result):
    """A least-squares fit: ``to_dict()`` equals ``eccaudit fit --json``."""

    def __init__(self, report: Dict[str, Any], figures: Dict[str, Any], table: _core.Table) -> None:
        super().__init__(report, table)
        self.figures = figures

    @property
    def eccentricity(self) -> float:
        """e of the first companion of the eccentric solution."""
        return float(self._report["eccentric"]["companions"][0]["eccentricity"]["value"])

    def plot(self, fig: Any = None) -> Any:
        """Periodogram and phase fold(s) as a matplotlib figure (needs matplotlib)."""
        from ._plots import plot_fit

        return plot_fit(self, fig)

    def _repr_html_(self) -> str:
        c = self._report["eccentric"]["companions"][0]
        rows = "".join(
            f"<tr><td>{html.escape(k)}</td><td>{html.escape(_fmt(v))}</td></tr>"
            for k, v in _element_rows(c)
        )
        return (
            f"<div><b>Least-squares fit</b> of {html.escape(self.table.source_name)} "
            f"({html.escape(self.table.time_label)})<table>{rows}</table></div>"
        )


def _fmt(entry: Any) -> str:
    if isinstance(entry, dict) and "value" in entry:
        error = entry.get("error")
        return f"{entry['value']:.6g}" + (f" ± {error:.2g}" if error is not None else "")
    return str(entry)


def _element_rows(companion: Dict[str, Any]) -> List[Tuple[str, Any]]:
    keys = ["period", "semi_amplitude", "eccentricity", "omega_deg"]
    return [(k, companion[k]) for k in keys if k in companion]


class PriorsResult(_Result):
    """Posterior of e under a set of priors: ``to_dict()`` equals ``eccaudit priors --json``;
    ``samples[i]`` holds prior i's chains as numpy arrays."""

    def __init__(self, report: Dict[str, Any], chains: Sequence[Any], figure: Dict[str, Any], table: _core.Table) -> None:
        super().__init__(report, table)
        self.figure = figure
        self.samples: List[Dict[str, Any]] = []
        for run, (names, shape, samples, log_density) in zip(report["runs"], chains):
            steps, walkers, dim = shape
            self.samples.append(
                {
                    "prior": run["summary"].get("prior", ""),
                    "names": list(names),
                    "samples": np.frombuffer(samples, dtype="<f8").reshape(steps, walkers, dim),
                    "log_density": np.frombuffer(log_density, dtype="<f8").reshape(steps, walkers),
                }
            )

    def plot(self, fig: Any = None) -> Any:
        """Posterior (and prior) density of e per prior (needs matplotlib)."""
        from ._plots import plot_priors

        return plot_priors(self, fig)

    def _repr_html_(self) -> str:
        rows = []
        for run in self._report["runs"]:
            s = run["summary"]
            rows.append(
                "<tr>" + "".join(
                    f"<td>{html.escape(str(x))}</td>"
                    for x in (s.get("prior", ""), _num(s.get("median")), _num(s.get("mean")))
                ) + "</tr>"
            )
        return (
            "<div><b>Posterior of e by prior</b><table><tr><th>prior</th><th>median</th>"
            f"<th>mean</th></tr>{''.join(rows)}</table></div>"
        )


def _num(x: Any) -> str:
    return f"{x:.4f}" if isinstance(x, (int, float)) else str(x)


class InjectResult(_Result, _TrialsMixin):
    """Injection–recovery: ``to_dict()`` equals ``eccaudit inject --json`` (the summary);
    ``trials`` holds the trial table (the command line's trials.csv) as numpy columns."""

    def __init__(self, summary: Dict[str, Any], trials: Dict[str, np.ndarray], figure: Dict[str, Any], table: _core.Table) -> None:
        super().__init__(summary, table)
        self.trials = trials
        self.figure = figure

    def plot(self, fig: Any = None) -> Any:
        """Bias curve: estimates against the injected e with 68%/95% bands (needs matplotlib)."""
        from ._plots import plot_bias

        return plot_bias(self.figure, fig)


class AuditResult(_Result, _TrialsMixin):
    """An audit: ``to_dict()`` equals ``eccaudit audit --json``; ``statement`` is the text of
    statement.txt; ``settings`` the replay file; ``trials`` the trial table as numpy columns."""

    def __init__(
        self,
        report: Dict[str, Any],
        settings: Dict[str, Any],
        trials: Dict[str, np.ndarray],
        statement: str,
        figure: Dict[str, Any],
        table: _core.Table,
    ) -> None:
        super().__init__(report, table)
        self.settings = settings
        self.trials = trials
        self.statement = statement
        self.figure = figure

    def save_settings(self, path: str) -> None:
        """Write the replay file: ``eccaudit audit FILE --settings path`` gives the same numbers."""
        with open(path, "w", encoding="utf-8") as handle:
            json.dump(self.settings, handle, indent=2)

    def plot(self, fig: Any = None) -> Any:
        """Bias curve with the real data's estimate marked (needs matplotlib)."""
        from ._plots import plot_bias

        return plot_bias(self.figure, fig)

    def __str__(self) -> str:
        return self.statement

    def _repr_html_(self) -> str:
        title = html.escape(f"{self.table.source_name} ({self.table.time_label})")
        body = html.escape(self.statement)
        return f"<div><b>eccaudit statement</b> — {title}<pre style='white-space: pre-wrap'>{body}</pre></div>"
