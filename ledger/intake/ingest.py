"""Reading forecast and actuals files (CSV, Parquet, pandas DataFrames) and validating them.

Everything here is checked before anything is written: a file goes in whole or not at all.
Errors name the file, the 1-based data row (header excluded) and the column.

Files are read in chunks (:mod:`sources`): each chunk's rows are checked and appended to a
staging table (:mod:`staging`); what needs the whole file (frequency, duplicates, horizons)
is checked there in SQL. Memory stays flat whatever the file's size.
"""

from __future__ import annotations

import contextlib
import dataclasses
import difflib
import re

import numpy as np
from ..lazy import pandas as pd
from ..lazy import pyarrow as pa
from ..lazy import pyarrow_compute as pc

from .columns import bound_columns, is_level_column, misspelt_column, quantile_columns
from .keys import case_twins_warning, check_option, normalise_keys
from ..errors import FrequencyError, InputError, LedgerError
from ..periods import FREQUENCIES, check_frequency, parse_label
from .plaincsv import NotPlain, PlainCsv
from .problems import Problems, refuse
from .sources import Chunk, open_table
from .staging import Stage
from ..store import Store
from ..wording import list_names, shorten

__all__ = [
    "ForecastFrame",
    "ActualsFrame",
    "read_forecasts",
    "read_actuals",
]



class _Staged:
    """A ``with`` block over a validated input drops its staging table at the end."""

    stage: Stage

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.stage.close()


@dataclasses.dataclass
class ForecastFrame(_Staged):
    """A validated forecast file, staged in the ledger's connection until it is written.

    The ready table holds one row per (model, origin, series, target period): row, model,
    origin, origin_index, series, period, period_index, point, and ``lo_<i>``/``hi_<i>`` per
    level ``levels[i]`` and ``q_<j>`` per quantile ``taus[j]`` (NULL where absent).
    """

    source: str
    frequency: str
    stage: Stage
    levels: list[float]
    taus: list[float]
    warnings: list[str]


@dataclasses.dataclass
class ActualsFrame(_Staged):
    """A validated actuals file, staged: row, series, period, period_index, value."""

    source: str
    frequency: str
    stage: Stage
    warnings: list[str]


def _require(source: str, columns: list[str], required: tuple[str, ...]) -> None:
    missing = [c for c in required if c not in columns]
    if missing:
        found = ", ".join(columns[:12]) + (" …" if len(columns) > 12 else "")
        near = [f"{hit[0]} looks like {m}: rename it {m}" for m in missing
                if (hit := difflib.get_close_matches(m, [c for c in columns if c not in required], n=1, cutoff=0.6))]
        raise InputError(
            source,
            f"missing required column {', '.join(missing)}; expected {', '.join(required)} "
            f"(found {found}){'; ' + '; '.join(near) if near else ''}",
        )


def _as_text(col: pd.Series) -> pa.Array:
    """Column values as stripped Arrow strings; datetimes as ISO dates, missing as ''.

    Arrow strings because the checks below are then vectorised C++ (strip, compare, length,
    cast, dictionary encoding) instead of Python loops over each cell.
    """
    if pd.api.types.is_datetime64_any_dtype(col):
        col = col.dt.strftime("%Y-%m-%d")
    try:
        text = pa.array(col.to_numpy(dtype=object), pa.string(), from_pandas=True)
    except (pa.ArrowTypeError, pa.ArrowInvalid):  # numbers, or text mixed with numbers
        text = pa.array(col.astype("str").where(col.notna(), None).to_numpy(dtype=object), pa.string(),
                        from_pandas=True)
    return pc.utf8_trim_whitespace(pc.fill_null(text, ""))


def _mask(array: pa.Array) -> np.ndarray:
    return array.to_numpy(zero_copy_only=False)


_NOT_TEXT = (bytes, bytearray, list, tuple, dict, set, np.ndarray)


def _check_value_kinds(source: str, raw: pd.Series, column: str, *, number: bool) -> None:
    """Refuse what a typed file (Parquet, a DataFrame) can hold but a key or a number is not:
    true/false for a number, bytes or lists or maps anywhere. Never coerced silently."""
    if number and pd.api.types.is_bool_dtype(raw):
        raise InputError(source, "holds true/false values, not numbers", row=1, column=column)
    if raw.dtype != object:
        return
    kind = pd.api.types.infer_dtype(raw, skipna=True)
    if kind in ("string", "empty", "integer", "floating", "mixed-integer-float", "date", "datetime", "decimal"):
        return
    for i, value in enumerate(raw):
        if isinstance(value, _NOT_TEXT) or (number and isinstance(value, (bool, np.bool_))):
            what = {bytes: "binary data", bytearray: "binary data", dict: "a map"}.get(type(value), "a list")
            if isinstance(value, (bool, np.bool_)):
                what = "a true/false value"
            raise InputError(source, f"holds {what}, not {'a number' if number else 'text'}; "
                             "write the column as plain values", row=i + 1, column=column)


def _numbers(source: str, frame: pd.DataFrame, column: str, *, allow_blank: bool) -> np.ndarray:
    """Parse a numeric column; refuse non-numbers, NaN and infinities with the first bad row."""
    raw = frame[column]
    _check_value_kinds(source, raw, column, number=True)
    if pd.api.types.is_numeric_dtype(raw):
        values = raw.to_numpy(dtype="float64", na_value=np.nan)
        blank = np.isnan(values)
        text = None
    else:
        text = _as_text(raw)
        blank = _mask(pc.equal(text, ""))
        values = _parse_floats(text, blank)
    bad = ~np.isfinite(values) & ~blank
    if text is not None:
        bad |= np.isnan(values) & ~blank
    if not allow_blank:
        bad |= blank
    if bad.any():
        def what(i: int) -> str:
            shown = "" if text is None else text[i].as_py()
            return "is empty" if blank[i] else f"{shorten(shown or values[i])!r} is not a finite number{_number_hint(shown)}"
        refuse(source, bad, column, what)
    return values


_DECIMAL_COMMA = re.compile(r"^[-+]?\d+,\d+$")
_GROUPED = re.compile(r"^[-+]?\d{1,3}([,\s'’]\d{3})+(\.\d+)?$")


def _number_hint(text: str) -> str:
    if _GROUPED.match(text):
        return "; remove the thousands separators"
    if _DECIMAL_COMMA.match(text):
        return "; write the decimal mark as a point (10.5)"
    return ""


def _parse_floats(text: pa.Array, blank: np.ndarray) -> np.ndarray:
    """Fast vectorised cast; only when it fails, the slower element-wise parse that marks bad cells."""
    present = pc.if_else(pa.array(blank), pa.scalar(None, pa.string()), text)
    try:
        return pc.cast(present, pa.float64()).to_numpy(zero_copy_only=False)
    except (pa.ArrowInvalid, ValueError):
        cells = pd.Series(present.to_numpy(zero_copy_only=False), dtype=object)
        return pd.to_numeric(cells, errors="coerce").to_numpy(dtype="float64", na_value=np.nan)


MAX_KEY_LENGTH = 200
MAX_HORIZON = 1000


def _keys(source: str, frame: pd.DataFrame, column: str) -> pa.Array:
    _check_value_kinds(source, frame[column], column, number=False)
    text = normalise_keys(source, _as_text(frame[column]), column)
    empty = _mask(pc.equal(text, ""))
    refuse(source, empty, column, lambda i: "is empty")
    long = _mask(pc.greater(pc.utf8_length(text), MAX_KEY_LENGTH))
    refuse(source, long, column,
           lambda i: f"{shorten(text[i].as_py())!r} is longer than {MAX_KEY_LENGTH} characters")
    return text


class _Labels:
    """Period labels of one column, parsed a chunk at a time into the stage's label table.

    Only one chunk's distinct labels are in memory at once, however many the file holds.
    """

    def __init__(self, column: str, stage: Stage):
        self.column = column
        self.stage = stage
        self.seen = False         # a readable label was staged (none when every label was refused)

    def learn(self, source: str, text: pa.Array, offset: int) -> None:
        """Parse the distinct labels of one chunk (rows ``offset + 1`` …)."""
        encoded = text.dictionary_encode()
        codes, uniques = encoded.indices.to_numpy(zero_copy_only=False), encoded.dictionary.to_pylist()
        if not uniques:
            return
        first_pos = np.unique(codes, return_index=True)[1]  # codes number labels by first appearance
        kinds, days, good, bad = [], [], [], Problems(source)
        for i, label in enumerate(uniques):
            try:
                kind, day = parse_label(label)
            except ValueError as exc:  # row within the chunk: the caller shifts it
                bad.add(InputError(source, str(exc), row=int(first_pos[i]) + 1, column=self.column))
                continue
            kinds.append(kind)
            days.append(day)
            good.append(i)
        if good:
            self.seen = True
            self.stage.add_labels(self.column, [uniques[i] for i in good], kinds, days,
                                  offset + first_pos[good] + 1)
        bad.raise_if_any()

    def kinds(self) -> dict[str, int]:
        """Each label kind (frequency) found in the column, with the first row holding one."""
        return self.stage.label_kinds(self.column)


def _decide_frequency(source: str, columns: list[_Labels], freq: str | None, known: set[str]) -> tuple[str, str | None]:
    """The file's one frequency and what said so (``--freq``, a label column's name, or None for
    the series' record): from --freq, else from the labels of the first column holding any (the
    kind most of its rows hold), else from the series' record. Rows of another kind are
    :func:`_other_frequencies`' to report."""
    if freq is not None:
        try:
            return check_frequency(freq), "--freq"
        except ValueError as exc:
            raise FrequencyError(f"--freq: {exc}") from None
    for labels in columns:
        kinds = labels.kinds()
        if len(kinds) > 1:      # the file's frequency is its rows' majority; the others are the mistakes
            counts = labels.stage.kind_rows(labels.column)
            return max(counts, key=lambda k: (counts[k][0], -counts[k][1])), labels.column
        if kinds:
            return next(iter(kinds)), labels.column
    if len(known) == 1:
        return next(iter(known)), None
    raise InputError(source, "holds bare dates, which fit several frequencies; say which with "
                     f"--freq ({', '.join(FREQUENCIES)})", row=1, column=columns[0].column)


def _other_frequencies(source: str, columns: list[_Labels], freq: str, said_by: str | None,
                       problems: Problems) -> None:
    """Every row whose label is of another frequency than the file's, each a problem; those rows
    are then left out of the stage so the whole-file checks still run on the others."""
    for labels in columns:
        if set(labels.kinds()) <= {freq}:
            continue
        found, total = labels.stage.other_kinds(labels.column, freq)
        problems.extend([InputError(source, f"is a {kind} label but --freq is {freq}" if said_by == "--freq" else
                                    f"mixes {' and '.join(sorted((kind, freq)))} labels; one file holds one frequency"
                                    if said_by == labels.column else
                                    f"is a {kind} label but column {said_by} holds {freq} labels",
                                    row=row, column=labels.column) for row, kind in found], total)
        labels.stage.drop_other_kinds(labels.column, freq)


def _extra_columns(columns: list[str], known: set[str], source: str) -> list[str]:
    """Refuse columns that look like misspelt bounds or quantiles; warn about the rest."""
    extras = []
    problems = Problems(source)
    for col in columns:
        if col in known or is_level_column(col):
            continue
        if fix := misspelt_column(col):
            problems.add(InputError(source, fix, column=col))
        else:
            extras.append(col)
    problems.raise_if_any()
    return extras


def _case_warnings(source: str, stage: Stage, *columns: tuple[str, str]) -> list[str]:
    """Warnings naming keys of the file that differ only by case from each other or the ledger's."""
    out = []
    for column, table in columns:
        if warning := case_twins_warning(source, column, stage.case_twins(column, table)):
            out.append(warning)
    return out


def _ignored(source: str, extras: list[str]) -> str:
    shown = list_names([shorten(c) for c in extras], 10)
    return f"{source}: ignored column{'s' if len(extras) > 1 else ''} {shown}"


def _bounds_named(columns: list[str], source: str) -> dict[float, tuple[str, str]]:
    """:func:`bound_columns`, naming a misspelt partner of a lone bound (lower80 beside upper_80)."""
    try:
        return bound_columns(columns, source)
    except InputError as exc:
        m = re.match(r"^has no matching (\S+) column$", exc.detail)
        near = [c for c in columns if m and (fix := misspelt_column(c)) and fix.endswith(f"name it {m[1]}")]
        if not near:
            raise
        raise InputError(source, f"{exc.detail}; {near[0]} looks like it: rename it {m[1]}", column=exc.column) from None


def _model_origin(source, frame, model, origin) -> tuple[pa.Array, pa.Array]:
    n = len(frame)
    out = []
    for column, option in (("model", model), ("origin", origin)):
        if option is not None:
            option = check_option(option, f"--{column}")
        if column in frame.columns:
            values = _keys(source, frame, column)
            if option is not None:
                differ = _mask(pc.not_equal(values, option))
                refuse(source, differ, column, lambda i: f"{values[i].as_py()!r} differs from --{column} {option}; "
                                                         "give one or the other")
        elif option is not None:
            values = pa.array(np.full(n, option, dtype=object), pa.string())
        else:
            raise InputError(source, f"has no {column} column and no --{column} was given")
        out.append(values)
    return out[0], out[1]


#: Take the fast road (:mod:`plaincsv`) for a CSV file when it can; tests of the exact reader turn it off.
PLAIN_ROAD = True


def read_forecasts(
    store: Store,
    data,
    *,
    model: str | None = None,
    origin: str | None = None,
    freq: str | None = None,
    name: str | None = None,
    progress=None,
) -> ForecastFrame:
    """Read and validate a forecast file into a staging table of ``store``: a plain CSV file by
    DuckDB's reader (:mod:`plaincsv`), anything else, or a plain-looking file with a problem,
    chunk by chunk by the exact reader.

    Use the result in a ``with`` block (it drops the staging table). Series the ledger already
    knows must keep their recorded frequency. ``progress(done, total)``: see :func:`sources.open_table`.
    """
    if PLAIN_ROAD:
        with contextlib.suppress(NotPlain):
            return _read_forecasts(store, data, model, origin, freq, name, progress, plain=True)
    return _read_forecasts(store, data, model, origin, freq, name, progress, plain=False)


def _read_forecasts(store, data, model, origin, freq, name, progress, *, plain: bool) -> ForecastFrame:
    if plain:
        table = PlainCsv.open(data, name)
    else:
        table = open_table(data, name=name, progress=progress)
    source, columns = table.source, table.columns
    problems = Problems(source)
    bound_cols, quant_cols, extras = _header(source, columns, ("series", "period", "forecast"), problems, {
        "bounds": lambda: _bounds_named(columns, source), "quantiles": lambda: quantile_columns(columns, source),
        "extras": lambda: _extra_columns(columns, {"series", "period", "forecast", "model", "origin"}, source)})
    if plain and problems:
        raise NotPlain("header")
    warnings = [_ignored(source, extras)] if extras else []
    levels, taus = list(bound_cols), list(quant_cols)
    numbers = {"point": "DOUBLE"} | {f"{side}_{i}": "DOUBLE" for i in range(len(levels)) for side in ("lo", "hi")}
    numbers |= {f"q_{j}": "DOUBLE" for j in range(len(taus))}
    stage = Stage(store.con, {"model": "VARCHAR", "origin": "VARCHAR", "series": "VARCHAR", "period": "VARCHAR"}
                  | numbers)
    try:
        periods, origins = _Labels("period", stage), _Labels("origin", stage)
        outside = _Outside(source)
        if plain:
            _plain_forecasts(table, stage, model, origin, bound_cols, quant_cols, (periods, origins), outside)
            if progress:
                progress(table.size, table.size)
        for chunk in () if plain else table.chunks:
            staged = _forecast_chunk(source, chunk, model, origin, periods, origins, bound_cols, quant_cols, problems)
            outside.add(chunk.offset, staged, len(levels))
            stage.append(chunk.offset, staged)
        frequency = None
        # With problems already found, the frequency's own problem may be their echo (no label
        # left to read it from): it is then not reported, and the whole-file checks are skipped.
        with (Problems(source) if problems else problems).guard():
            frequency, said_by = _decide_frequency(source, [periods, origins], freq, stage.known_frequencies())
        if frequency is not None:
            _other_frequencies(source, [periods, origins], frequency, said_by, problems)
        if frequency is not None and periods.seen:
            option = f"--origin {origin}" if origin is not None and "origin" not in columns and \
                not periods.kinds() else None
            _recorded(stage, source, frequency, problems, option)
            stage.resolve(frequency, ["period", "origin"], ["model", "origin_index", "series", "period_index"])
            with problems.guard():
                stage.check_horizons(source, frequency, MAX_HORIZON)
            with problems.guard():
                stage.check_unique(source, ["model", "origin_index", "series", "period_index"], "period",
                                   "a second forecast for the same series, period, model and origin")
        if origin is not None and "origin" not in columns:
            problems.name_option("origin", f"--origin {origin}")
        problems.raise_if_any()
        warnings += _case_warnings(source, stage, ("series", "series"), ("model", "runs"))
    except BaseException:
        stage.close()
        raise
    return ForecastFrame(source, frequency, stage, levels, taus,
                         warnings + outside.warnings([lower for lower, _ in bound_cols.values()]))


def _plain_option(value: str | None, flag: str) -> str | None:
    """An option as the exact reader would read it; NotPlain when it would refuse it or its length."""
    if value is None:
        return None
    try:
        value = check_option(value, flag)
    except LedgerError:
        raise NotPlain(flag) from None
    if len(value.encode()) > MAX_KEY_LENGTH:
        raise NotPlain(flag)
    return value


def _plain_forecasts(table: PlainCsv, stage: Stage, model, origin, bound_cols, quant_cols,
                     labels: tuple[_Labels, ...], outside: "_Outside") -> None:
    """Stage a plain forecast file from SQL (NotPlain if any cell is not plain): its rows, its
    labels, and the count of points outside their own intervals."""
    numbers = {"point": ("forecast", False)}
    for i, (lo, hi) in enumerate(bound_cols.values()):
        numbers |= {f"lo_{i}": (lo, True), f"hi_{i}": (hi, True)}
    numbers |= {f"q_{j}": (col, True) for j, col in enumerate(quant_cols.values())}
    table.load(stage.con, stage.table, keys={"model": _plain_option(model, "--model"),
                                            "origin": _plain_option(origin, "--origin"),
                                            "series": None, "period": None}, numbers=numbers,
               pairs=[(f"lo_{i}", f"hi_{i}") for i in range(len(bound_cols))],
               ordered=[(f"q_{j}", f"q_{j + 1}") for j in range(len(quant_cols) - 1)])
    _plain_labels(table, stage, labels)
    if bound_cols:
        out = " , ".join(f"count(*) FILTER (point < lo_{i} OR point > hi_{i}), "
                         f"min(row) FILTER (point < lo_{i} OR point > hi_{i})" for i in range(len(bound_cols)))
        found = stage.con.execute(f"SELECT {out} FROM {stage.table}").fetchone()
        for i in range(len(bound_cols)):
            if found[2 * i]:
                outside.count[i], outside.first[i] = int(found[2 * i]), int(found[2 * i + 1])


def _plain_labels(table: PlainCsv, stage: Stage, labels: tuple[_Labels, ...]) -> None:
    for column in labels:
        for batch in table.labels(stage.con, stage.table, column.column):
            stage.add_labels(column.column, *batch)
            column.seen = True


def _header(source, columns, required, problems: Problems, checks: dict) -> tuple[dict, dict, list]:
    """The bound, quantile and extra columns, every header problem collected (a missing required
    column too: the checks of the columns that are there still run)."""
    with problems.guard():
        _require(source, columns, required)
    found = {"bounds": {}, "quantiles": {}, "extras": []}
    for name, check in checks.items():
        with problems.guard():
            found[name] = check()
    return found["bounds"], found["quantiles"], found["extras"]


def _recorded(stage: Stage, source: str, frequency: str, problems: Problems, option: str | None = None) -> None:
    """Every series recorded with another frequency, at its first row in the file.

    ``option``: the option (``--origin 2025-04``) that set the file's frequency, which is then
    the problem's cause rather than the series column.
    """
    found, total = stage.recorded_conflicts(frequency)
    rule = "a series keeps the frequency it was first recorded with"
    problems.extend([InputError(source, f"{option}: is a {frequency} label, but series {key!r} is recorded as "
                                        f"{recorded}; {rule}") if option else
                     InputError(source, f"series {key!r} is recorded as {recorded}, but this file is {frequency}; "
                                        f"{rule}", row=row, column="series")
                     for row, key, recorded in found], total)


def _text_or_blank(col: pd.Series) -> pa.Array:
    """A refused column's text for the checks that still run, or blanks when it is not text at all."""
    try:
        return _as_text(col)
    except (pa.ArrowTypeError, pa.ArrowInvalid, TypeError, ValueError, UnicodeDecodeError):  # already collected
        return pa.array(np.full(len(col), "", dtype=object), pa.string())


def _checked(problems: Problems, offset: int, check, fallback):
    """``check()``, or ``fallback()`` after its problems are collected (so the other checks still run)."""
    with problems.guard(offset):
        return check()
    return fallback()


def _key_columns(source, frame: pd.DataFrame, problems: Problems, offset: int, *columns: str) -> list[pa.Array]:
    """Each key column checked (its problems collected), or blanks for one the file lacks (its
    absence is the header's problem, so nothing more is said of it)."""
    out = []
    for column in columns:
        if column not in frame.columns:
            out.append(pa.array(np.full(len(frame), "", dtype=object), pa.string()))
            continue
        out.append(_checked(problems, offset, lambda: _keys(source, frame, column),
                            lambda: _text_or_blank(frame[column])))
    return out


def _forecast_chunk(source, chunk: Chunk, model, origin, periods: _Labels, origins: _Labels,
                    bound_cols, quant_cols, problems: Problems) -> dict[str, np.ndarray]:
    """One chunk's checked columns, rows numbered from 1 within the chunk; problems go to ``problems``."""
    frame, offset, n = chunk.frame, chunk.offset, len(chunk.frame)
    blank = lambda: pa.array(np.full(n, "", dtype=object), pa.string())
    nan = lambda: np.full(n, np.nan)
    models, origin_text = _checked(problems, offset, lambda: _model_origin(source, frame, model, origin),
                                   lambda: (blank(), _text_or_blank(frame["origin"]) if "origin" in frame.columns
                                            else pa.array(np.full(n, str(origin or ""), dtype=object), pa.string())))
    keys, period_text = _key_columns(source, frame, problems, offset, "series", "period")
    with problems.guard(offset):
        periods.learn(source, period_text, offset)
    with problems.guard(offset):
        origins.learn(source, origin_text, offset)
    point = nan() if "forecast" not in frame.columns else \
        _checked(problems, offset, lambda: _numbers(source, frame, "forecast", allow_blank=False), nan)
    out = {"model": models, "origin": origin_text, "series": keys, "period": period_text, "point": point}
    for i, (lo, hi) in enumerate(bound_cols.values()):
        out[f"lo_{i}"], out[f"hi_{i}"] = _checked(problems, offset, lambda: _bounds(source, frame, lo, hi),
                                                  lambda: (nan(), nan()))
    quantiles = {tau: _checked(problems, offset, lambda: _numbers(source, frame, col, allow_blank=True), nan)
                 for tau, col in quant_cols.items()}
    with problems.guard(offset):
        _check_quantile_order(source, quantiles, quant_cols)
    for j, values in enumerate(quantiles.values()):
        out[f"q_{j}"] = values
    return out


def _bounds(source, frame, lower_col, upper_col) -> tuple[np.ndarray, np.ndarray]:
    lower = _numbers(source, frame, lower_col, allow_blank=True)
    upper = _numbers(source, frame, upper_col, allow_blank=True)
    half = np.isnan(lower) != np.isnan(upper)
    refuse(source, half & np.isnan(upper), upper_col,
           lambda i: f"is empty but {lower_col} is given; give both bounds or neither")
    refuse(source, half & np.isnan(lower), lower_col,
           lambda i: f"is empty but {upper_col} is given; give both bounds or neither")
    refuse(source, lower > upper, lower_col,
           lambda i: f"lower bound {lower[i]:g} is above the upper bound {upper[i]:g}")
    return lower, upper


def _check_quantile_order(source, quantiles: dict[float, np.ndarray], columns: dict[float, str]) -> None:
    taus = list(quantiles)
    for a, b in zip(taus, taus[1:]):
        refuse(source, quantiles[a] > quantiles[b], columns[b],
               lambda i: f"quantiles decrease: {columns[a]} = {quantiles[a][i]:g} is above "
                         f"{columns[b]} = {quantiles[b][i]:g}")


class _Outside:
    """Counts point forecasts outside their own interval, level by level, across chunks."""

    def __init__(self, source: str):
        self.source = source
        self.count: dict[int, int] = {}
        self.first: dict[int, int] = {}

    def add(self, offset: int, staged: dict[str, np.ndarray], n_levels: int) -> None:
        point = staged["point"]
        for i in range(n_levels):
            outside = (point < staged[f"lo_{i}"]) | (point > staged[f"hi_{i}"])
            if outside.any():
                self.first.setdefault(i, offset + int(np.argmax(outside)) + 1)
                self.count[i] = self.count.get(i, 0) + int(outside.sum())

    def warnings(self, lower_columns: list[str]) -> list[str]:
        """One warning per level, named by its column's own spelling (two levels may print alike)."""
        return [f"{self.source}: {self.count[i]} point forecast(s) lie outside their own "
                f"{lower_columns[i].split('_', 1)[1]}% interval (first at row {self.first[i]})"
                for i in sorted(self.count)]


def read_actuals(store: Store, data, *, freq: str | None = None, name: str | None = None,
                 progress=None) -> ActualsFrame:
    """Read and validate an actuals file (series, period, actual) into a staging table, by the
    fast road or the exact reader as :func:`read_forecasts` does.

    Use the result in a ``with`` block (it drops the staging table).
    """
    if PLAIN_ROAD:
        with contextlib.suppress(NotPlain):
            return _read_actuals(store, data, freq, name, progress, plain=True)
    return _read_actuals(store, data, freq, name, progress, plain=False)


def _read_actuals(store, data, freq, name, progress, *, plain: bool) -> ActualsFrame:
    table = PlainCsv.open(data, name) if plain else open_table(data, name=name, progress=progress)
    source, columns = table.source, table.columns
    problems = Problems(source)
    _header(source, columns, ("series", "period", "actual"), problems, {})
    if plain and problems:
        raise NotPlain("header")
    extras = [c for c in columns if c not in ("series", "period", "actual")]
    warnings = [_ignored(source, extras)] if extras else []
    stage = Stage(store.con, {"series": "VARCHAR", "period": "VARCHAR", "value": "DOUBLE"})
    try:
        periods = _Labels("period", stage)
        if plain:
            table.load(stage.con, stage.table, keys={"series": None, "period": None},
                       numbers={"value": ("actual", False)})
            _plain_labels(table, stage, (periods,))
            if progress:
                progress(table.size, table.size)
        for chunk in () if plain else table.chunks:
            frame, offset = chunk.frame, chunk.offset
            keys, text = _key_columns(source, frame, problems, offset, "series", "period")
            with problems.guard(offset):
                periods.learn(source, text, offset)
            nan = lambda: np.full(len(frame), np.nan)
            value = nan() if "actual" not in frame.columns else \
                _checked(problems, offset, lambda: _numbers(source, frame, "actual", allow_blank=False), nan)
            stage.append(offset, {"series": keys, "period": text, "value": value})
        frequency = None
        # With problems already found, the frequency's own problem may be their echo (no label
        # left to read it from): it is then not reported, and the whole-file checks are skipped.
        with (Problems(source) if problems else problems).guard():
            frequency, said_by = _decide_frequency(source, [periods], freq, stage.known_frequencies())
        if frequency is not None:
            _other_frequencies(source, [periods], frequency, said_by, problems)
        if frequency is not None and periods.seen:
            _recorded(stage, source, frequency, problems)
            stage.resolve(frequency, ["period"], ["series", "period_index"])
            with problems.guard():
                stage.check_unique(source, ["series", "period_index"], "period",
                                   "a second actual for the same series and period")
        problems.raise_if_any()
        warnings += _case_warnings(source, stage, ("series", "series"))
    except BaseException:
        stage.close()
        raise
    return ActualsFrame(source, frequency, stage, warnings)
