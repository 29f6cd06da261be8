"""The functions of the eccaudit package: turn any table-like input into a core table, pass
keyword settings to the core as JSON (the core's serde settings decide what is valid), wrap the
results."""

from __future__ import annotations

import io
import json
import os
from typing import Any, Callable, Mapping, Optional, Sequence, Union

import numpy as np

from . import _core
from ._results import AuditResult, FitResult, InjectResult, PriorsResult, _trials_columns

TableLike = Any

_STANDARD = ("time", "rv", "err", "instrument")


def read_table(
    path: Union[str, "os.PathLike[str]"],
    *,
    velocity_unit: Optional[str] = None,
    time: Optional[str] = None,
    delimiter: Optional[str] = None,
) -> _core.Table:
    """Read a velocity table file: CSV, TSV, whitespace-separated, astropy ECSV or a VOTable.

    ``velocity_unit`` (``"m/s"`` or ``"km/s"``) and ``time`` (``"BJD"``, ``"MJD"``,
    ``"BJD-2450000"``, ...) apply when the file does not state them. A table that cannot be read
    raises :class:`eccaudit.TableError`, whose message names the file, line and column (also in
    its ``file``, ``line`` and ``column`` attributes).
    """
    return _core.read_table(os.fspath(path), velocity_unit, time, delimiter)


def _is_astropy_table(data: Any) -> bool:
    return type(data).__module__.startswith("astropy.table") and hasattr(data, "colnames")


def _is_dataframe(data: Any) -> bool:
    return type(data).__module__.startswith("pandas") and hasattr(data, "to_csv")


def _is_column_name(value: Any) -> bool:
    return isinstance(value, str)


def _quantity_in(values: Any, unit: str) -> np.ndarray:
    """Plain floats; astropy Quantities are converted to ``unit``."""
    if hasattr(values, "to_value") and hasattr(values, "unit"):
        return np.asarray(values.to_value(unit), dtype=float)
    return np.asarray(values, dtype=float)


def _time_values(values: Any, time_convention: Optional[str]) -> "tuple[np.ndarray, Optional[str]]":
    """Times in days; an astropy ``Time`` becomes its JD (BJD when its scale is tdb)."""
    if hasattr(values, "jd") and hasattr(values, "scale"):
        scale = str(values.scale).lower()
        label = "BJD" if scale in ("tdb", "tcb") else "JD"
        return np.asarray(values.jd, dtype=float), time_convention or label
    return _quantity_in(values, "d"), time_convention


def table(
    data: TableLike = None,
    *,
    time: Any = None,
    rv: Any = None,
    err: Any = None,
    instrument: Any = None,
    velocity_unit: Optional[str] = None,
    time_convention: Optional[str] = None,
    name: str = "table",
) -> _core.Table:
    """Any table-like input as an :class:`eccaudit.Table`.

    ``data`` may be an :class:`eccaudit.Table`, a path, an astropy ``Table`` (read through
    eccaudit's ECSV reader, so units and ``Time`` columns are honoured) or a pandas
    ``DataFrame`` (read through the CSV reader: column names as in a CSV header, e.g.
    ``rv [km/s]``, or give ``velocity_unit``). With ``data``, ``time``/``rv``/``err``/
    ``instrument`` may name its columns. Without ``data`` they are arrays (numpy, lists or
    astropy Quantities/Time); plain velocities are in ``velocity_unit`` (default m/s).
    """
    if isinstance(data, _core.Table):
        return data
    if isinstance(data, (str, os.PathLike)):
        return read_table(data, velocity_unit=velocity_unit, time=time_convention)
    names = {"time": time, "rv": rv, "err": err, "instrument": instrument}
    chosen = {k: v for k, v in names.items() if v is not None}
    if data is not None and not all(_is_column_name(v) for v in chosen.values()):
        raise TypeError("with a table given, time=, rv=, err=, instrument= name its columns")
    if _is_astropy_table(data):
        t = data
        if chosen:
            from astropy.table import Table as AstropyTable

            t = AstropyTable()
            for role, column in chosen.items():
                t[role] = data[column]
        buffer = io.StringIO()
        t.write(buffer, format="ascii.ecsv")
        return _core.parse_text(
            buffer.getvalue(), f"{name}.ecsv", velocity_unit, time_convention, None
        )
    if _is_dataframe(data):
        frame = data
        if chosen:
            frame = data[[chosen[r] for r in chosen]].copy()
            frame.columns = list(chosen)
        text = frame.to_csv(index=False)
        return _core.parse_text(text, f"{name}.csv", velocity_unit, time_convention, None)
    if data is not None:
        raise TypeError(
            f"cannot read {type(data).__name__}: give a path, an eccaudit.Table, an astropy "
            "Table, a pandas DataFrame, or arrays as time=, rv=, err="
        )
    if time is None or rv is None or err is None:
        raise TypeError("give data, or the arrays time=, rv= and err=")
    unit = velocity_unit or "m/s"
    times, convention = _time_values(time, time_convention)
    factor = 1000.0 if unit.replace(" ", "").lower() in ("km/s", "kms-1") else 1.0
    velocities = _quantity_in(rv, "m/s") if hasattr(rv, "unit") else np.asarray(rv, float) * factor
    errors = _quantity_in(err, "m/s") if hasattr(err, "unit") else np.asarray(err, float) * factor
    n = len(times)
    instruments = ["default"] * n if instrument is None else [str(x) for x in instrument]
    return _core.table_from_columns(
        name,
        [float(x) for x in times],
        [float(x) for x in velocities],
        [float(x) for x in errors],
        instruments,
        convention,
    )


def _split_table_kwargs(kwargs: dict) -> "tuple[dict, dict]":
    keys = ("time", "rv", "err", "instrument", "velocity_unit", "time_convention", "name")
    table_kwargs = {k: kwargs.pop(k) for k in keys if k in kwargs}
    return table_kwargs, kwargs


def _progress_callback(progress: Union[bool, Callable[[int, int], Any]], desc: str):
    """A tqdm bar (tqdm.auto: a widget in notebooks) when tqdm is installed, else nothing."""
    if callable(progress):
        return progress, None
    if not progress:
        return None, None
    try:
        from tqdm.auto import tqdm
    except ImportError:
        return None, None
    bar = tqdm(total=0, desc=desc, unit="", leave=False)

    def update(done: int, total: int) -> None:
        if bar.total != total:
            bar.total = total
            bar.refresh()
        bar.update(done - bar.n)

    return update, bar


def _close(bar: Any) -> None:
    if bar is not None:
        bar.close()


def _with_progress(
    progress: Union[bool, Callable[[int, int], Any]], desc: str, call: Callable[[Any], Any]
) -> Any:
    """``call(callback)`` with the progress callback of ``progress`` (a bar counting ``desc``);
    the bar is closed however the call ends (also on KeyboardInterrupt)."""
    callback, bar = _progress_callback(progress, desc)
    try:
        return call(callback)
    finally:
        _close(bar)


def fit(data: TableLike = None, **settings: Any) -> FitResult:
    """Least-squares Keplerian fit (as ``eccaudit fit``).

    Settings (the command's flags): the model, as the core's ``ModelSpec``: ``companions`` (1),
    ``periods`` (the repeated ``--period``), ``trend``, ``jitter`` (``"auto"``, ``"fit"`` or
    ``"off"``), ``min_period`` (1), ``max_period`` [d], ``max_fap`` (0.01); and ``peaks`` (3),
    ``random_starts`` (0), ``seed`` (1), ``stellar_mass`` [solar masses]. Table keywords
    (``time``, ``rv``, ``err``, ``instrument``, ``velocity_unit``, ``time_convention``) go to
    :func:`eccaudit.table`.
    """
    table_kwargs, settings = _split_table_kwargs(dict(settings))
    t = table(data, **table_kwargs)
    report, figures = _core.fit(t, json.dumps(settings))
    return FitResult(json.loads(report), json.loads(figures), t)


def priors(
    data: TableLike = None,
    *,
    threads: Optional[int] = None,
    progress: Union[bool, Callable[[int, int], Any]] = True,
    **settings: Any,
) -> PriorsResult:
    """Posterior of e under a set of eccentricity priors (as ``eccaudit priors``).

    Settings (the core's ``SensitivityRequest``, the command's flags): ``priors`` (list of prior
    specs such as ``"uniform:0..0.5"``, ``"kipping2013"``, ``"rayleigh(0.3)"``; default the six
    of the command), ``walkers`` (32), ``steps`` (4000), ``burn`` (1000), ``seed`` (1),
    ``period``, ``period_range`` ([1, 1e4]), ``k_max``, ``jitter_max``, ``jitter`` (True),
    ``trend``. Priors run in parallel on ``threads`` (default all cores); the numbers do not
    depend on it.
    """
    table_kwargs, settings = _split_table_kwargs(dict(settings))
    t = table(data, **table_kwargs)
    report, chains, figure = _with_progress(
        progress, "posterior steps", lambda callback: _core.priors(t, json.dumps(settings), threads, callback)
    )
    return PriorsResult(json.loads(report), chains, json.loads(figure), t)


def inject(
    data: TableLike = None,
    *,
    threads: Optional[int] = None,
    progress: Union[bool, Callable[[int, int], Any]] = True,
    **settings: Any,
) -> InjectResult:
    """Injection–recovery at the table's own epochs and uncertainties (as ``eccaudit inject
    FILE``).

    Settings (the command's flags): the model fitted to the table (``companions``, ``periods``,
    ``trend``, ``jitter``, ``min_period``, ``max_period``, ``max_fap``, as for :func:`fit`),
    ``k`` (list, m/s) or ``k_over_sigma`` (default: the fitted K), ``e`` (injected
    eccentricities), ``omega_deg``, ``added_noise`` [m/s], ``trials`` (200 per cell), ``seed`` (1), ``period_search``, ``start_e``
    ([0.1, 0.4]), ``omega_starts`` (4), ``lucy_sweeney`` (True), ``posterior`` (list of prior
    specs; default ``["uniform"]``, ``[]`` for least squares only), ``posterior_walkers`` (24),
    ``posterior_steps`` (600), ``posterior_burn`` (300).
    """
    table_kwargs, settings = _split_table_kwargs(dict(settings))
    t = table(data, **table_kwargs)
    summary, trials, figure = _with_progress(
        progress, "trials", lambda callback: _core.inject(t, json.dumps(settings), threads, callback)
    )
    return InjectResult(json.loads(summary), _trials_columns(trials), json.loads(figure), t)


def default_audit_settings() -> dict:
    """Every audit setting with its default: the replay file ``eccaudit audit --settings``
    reads and the page's "Download settings" writes."""
    return json.loads(_core.default_audit_settings())


def _merge(base: dict, update: Mapping[str, Any]) -> dict:
    merged = dict(base)
    for key, value in update.items():
        if isinstance(value, Mapping) and isinstance(merged.get(key), Mapping):
            merged[key] = _merge(merged[key], value)
        else:
            merged[key] = value
    return merged


def audit(
    data: TableLike = None,
    settings: Union[None, str, "os.PathLike[str]", Mapping[str, Any]] = None,
    *,
    threads: Optional[int] = None,
    progress: Union[bool, Callable[[int, int], Any]] = True,
    **kwargs: Any,
) -> AuditResult:
    """The whole audit (as ``eccaudit audit``): least-squares fit, injection–recovery at the
    fitted orbit with the data's own epochs and error bars, and the calibrated statement.

    ``settings`` is a replay file (a path, JSON text or a dict, e.g. from the page's "Download
    settings"); keyword arguments are merged into it, nested like the file:
    ``audit(t, injection={"trials_per_cell": 100}, seed=3)``. Missing fields take their defaults
    (:func:`default_audit_settings`); unknown fields are errors. Table keywords go to
    :func:`eccaudit.table`. Trials run on ``threads`` (default all cores); the numbers do not
    depend on it. Ctrl-C (KeyboardInterrupt) stops the run cleanly.
    """
    table_kwargs, kwargs = _split_table_kwargs(dict(kwargs))
    t = table(data, **table_kwargs)
    if settings is None:
        base: dict = {}
    elif isinstance(settings, Mapping):
        base = dict(settings)
    elif isinstance(settings, os.PathLike) or (
        isinstance(settings, str) and not settings.lstrip().startswith("{")
    ):
        with open(settings, encoding="utf-8") as handle:
            base = json.load(handle)
    else:
        base = json.loads(settings)
    merged = _merge(base, kwargs)
    merged.setdefault("format", "eccaudit-audit-settings")
    merged.setdefault("version", 1)
    report, used, trials, statement, figure = _with_progress(
        progress, "trials", lambda callback: _core.audit(t, json.dumps(merged), threads, callback)
    )
    return AuditResult(
        json.loads(report), json.loads(used), _trials_columns(trials), statement, json.loads(figure), t
    )
