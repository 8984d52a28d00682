"""Reading forecast and actuals files (CSV, Parquet, pandas DataFrames) and validating them.

Everything here is checked before anything is written: a file goes in whole or not at all.
Errors name the file, the 1-based data row (header excluded) and the column.
"""

from __future__ import annotations

import dataclasses
from collections import Counter
import datetime as dt
import os
import re
from pathlib import Path

import numpy as np
import pandas as pd

from .csvread import list_names, read_csv_strings, shorten
from .errors import FrequencyError, InputError
from .periods import FREQUENCIES, check_frequency, parse_label, period_index, period_label, period_start

__all__ = [
    "ForecastFrame",
    "ActualsFrame",
    "read_table",
    "read_forecasts",
    "read_actuals",
    "format_level",
]

_BOUND = re.compile(r"^(lower|upper)_(\d+(?:\.\d+)?)$")
_QUANTILE = re.compile(r"^q(\d{2,}|0\.\d+|\d+\.\d+)$")
_BOUND_LIKE = re.compile(
    r"^(lower|upper|lo|hi|low|high|lwr|upr|lb|ub)[\s_\-.]*(\d+(?:\.\d+)?)(%|pct)?$"
)
_QUANTILE_LIKE = re.compile(r"^(q|p|quantile|tau)[\s_\-.]*(\d+(?:\.\d+)?)$")
_LOWER_WORDS = {"lower", "lo", "low", "lwr", "lb"}


def format_level(level: float) -> str:
    """80.0 -> '80', 97.5 -> '97.5': how a level appears in column names."""
    return f"{level:g}"


@dataclasses.dataclass
class ForecastFrame:
    """A validated forecast file: one row per (model, origin, series, target period)."""

    source: str
    frequency: str
    cells: pd.DataFrame  # model, origin, origin_index, series, period, period_index, horizon, point
    bounds: dict[float, tuple[np.ndarray, np.ndarray]]  # level -> (lower, upper), NaN where absent
    quantiles: dict[float, np.ndarray]  # tau -> values, NaN where absent
    warnings: list[str]


@dataclasses.dataclass
class ActualsFrame:
    """A validated actuals file: one row per (series, period)."""

    source: str
    frequency: str
    values: pd.DataFrame  # series, period, period_index, value
    warnings: list[str]


def read_table(data: str | os.PathLike | pd.DataFrame, *, name: str | None = None) -> tuple[str, pd.DataFrame]:
    """Read a CSV or Parquet file (or take a DataFrame) with lower-cased, trimmed column names."""
    if isinstance(data, pd.DataFrame):
        source, frame = name or "<DataFrame>", data.copy()
    else:
        path = Path(data)
        source = name or path.name
        frame = _read_file(path, source)
    frame.columns = [str(c).strip().lstrip("\ufeff").strip().lower() for c in frame.columns]
    counts = Counter(frame.columns)
    dupes = sorted(c for c, k in counts.items() if k > 1)
    if dupes:
        raise InputError(source, f"the header names {', '.join(dupes)} more than once (column names are case-insensitive)")
    if len(frame) == 0:
        raise InputError(source, "the file has a header but no data rows")
    return source, frame.reset_index(drop=True)


def _read_file(path: Path, source: str) -> pd.DataFrame:
    if not path.exists():
        raise InputError(source, f"no such file: {path}")
    if path.is_dir():
        raise InputError(source, f"{path} is a folder, not a file")
    if path.suffix.lower() not in (".parquet", ".pq"):
        return read_csv_strings(path, source)
    try:
        return pd.read_parquet(path)
    except (ValueError, OSError) as exc:
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise InputError(source, f"cannot be read as Parquet: {first}") from None


def _require(source: str, frame: pd.DataFrame, required: tuple[str, ...]) -> None:
    missing = [c for c in required if c not in frame.columns]
    if missing:
        found = ", ".join(frame.columns[:12]) + (" …" if len(frame.columns) > 12 else "")
        raise InputError(
            source,
            f"missing required column {', '.join(missing)}; expected {', '.join(required)} "
            f"(found {found})",
        )


def _as_text(col: pd.Series) -> pd.Series:
    """Column values as stripped strings; datetimes as ISO dates, missing as ''."""
    if pd.api.types.is_datetime64_any_dtype(col):
        return col.dt.strftime("%Y-%m-%d").fillna("")
    return col.astype("string").fillna("").str.strip()


def _numbers(source: str, frame: pd.DataFrame, column: str, *, allow_blank: bool) -> np.ndarray:
    """Parse a numeric column; refuse non-numbers, NaN and infinities with the first bad row."""
    raw = frame[column]
    if pd.api.types.is_numeric_dtype(raw):
        values = raw.to_numpy(dtype="float64", na_value=np.nan)
        blank = np.isnan(values)
        text = None
    else:
        text = _as_text(raw)
        blank = (text == "").to_numpy()
        values = _parse_floats(text, blank)
    bad = ~np.isfinite(values) & ~blank
    if text is not None:
        bad |= np.isnan(values) & ~blank
    if not allow_blank:
        bad |= blank
    if bad.any():
        i = int(np.argmax(bad))
        shown = "" if text is None else text.iloc[i]
        what = "is empty" if blank[i] else f"{shorten(shown or values[i])!r} is not a finite number{_number_hint(shown)}"
        raise InputError(source, what, row=i + 1, column=column)
    return values


_DECIMAL_COMMA = re.compile(r"^[-+]?\d+,\d+$")
_GROUPED = re.compile(r"^[-+]?\d{1,3}([,\s'’]\d{3})+(\.\d+)?$")


def _number_hint(text: str) -> str:
    if _GROUPED.match(text):
        return "; remove the thousands separators"
    if _DECIMAL_COMMA.match(text):
        return "; write the decimal mark as a point (10.5)"
    return ""


def _parse_floats(text: pd.Series, blank: np.ndarray) -> np.ndarray:
    """Fast vectorised cast; only when it fails, the slower element-wise parse that marks bad cells."""
    try:
        return text.where(~blank, None).astype("float64").to_numpy(dtype="float64", na_value=np.nan)
    except (ValueError, TypeError):
        return pd.to_numeric(text.where(~blank, None), errors="coerce").to_numpy(dtype="float64", na_value=np.nan)


MAX_KEY_LENGTH = 200
MAX_HORIZON = 1000


def _keys(source: str, frame: pd.DataFrame, column: str) -> np.ndarray:
    text = _as_text(frame[column])
    empty = (text == "").to_numpy()
    if empty.any():
        raise InputError(source, "is empty", row=int(np.argmax(empty)) + 1, column=column)
    long = (text.str.len() > MAX_KEY_LENGTH).to_numpy()
    if long.any():
        i = int(np.argmax(long))
        raise InputError(source, f"{shorten(text.iloc[i])!r} is longer than {MAX_KEY_LENGTH} characters",
                         row=i + 1, column=column)
    return text.to_numpy(dtype=object)


def _labels(source: str, text: np.ndarray, column: str) -> tuple[dict[str, tuple[str | None, dt.date]], pd.Series]:
    """Parse each distinct label once (files repeat few labels many times)."""
    series = pd.Series(text, dtype=object)
    parsed: dict[str, tuple[str | None, dt.date]] = {}
    for label in pd.unique(series):
        try:
            parsed[label] = parse_label(label)
        except ValueError as exc:
            row = int(np.argmax((series == label).to_numpy())) + 1
            raise InputError(source, str(exc), row=row, column=column) from None
    return parsed, series


def _first_row(series: pd.Series, labels) -> int:
    return int(np.argmax(series.isin(list(labels)).to_numpy())) + 1


def _decide_frequency(
    source: str,
    parsed: list[tuple[str, dict, pd.Series]],
    freq: str | None,
    known: set[str],
) -> str:
    """The file's one frequency: from --freq, from its labels, or from the series' record."""
    said_by = None
    if freq is not None:
        try:
            freq = check_frequency(freq)
        except ValueError as exc:
            raise FrequencyError(f"--freq: {exc}") from None
        said_by = f"--freq is {freq}"
    for column, labels, text in parsed:
        kinds = {k for k, _ in labels.values() if k is not None}
        if len(kinds) > 1:
            second = sorted(kinds)[1]
            row = _first_row(text, [lab for lab, (k, _) in labels.items() if k == second])
            raise InputError(source, f"mixes {' and '.join(sorted(kinds))} labels; one file holds one frequency",
                             row=row, column=column)
        if kinds:
            kind = kinds.pop()
            if freq is not None and kind != freq:
                row = _first_row(text, [lab for lab, (k, _) in labels.items() if k == kind])
                raise InputError(source, f"is a {kind} label but {said_by}", row=row, column=column)
            freq, said_by = kind, f"column {column} holds {kind} labels"
    if freq is None and len(known) == 1:
        freq = next(iter(known))
    if freq is None:
        raise InputError(source, "holds bare dates, which fit several frequencies; say which with "
                         f"--freq ({', '.join(FREQUENCIES)})", row=1, column=parsed[0][0])
    return freq


def _check_recorded(source: str, keys: np.ndarray, freq: str, recorded: dict[str, str]) -> None:
    codes, uniques = pd.factorize(keys)
    clashing = np.array([recorded.get(k, freq) != freq for k in uniques], dtype=bool)
    if clashing.any():
        i = int(np.argmax(clashing[codes]))
        key = keys[i]
        raise FrequencyError(
            f"{source} row {i + 1} column series: series {key!r} is recorded as {recorded[key]}, "
            f"but this file is {freq}; a series keeps the frequency it was first recorded with"
        )


def _indices(labels: dict[str, tuple[str | None, dt.date]], text: pd.Series, freq: str) -> tuple[np.ndarray, np.ndarray]:
    """Period start dates (datetime64[D]) and indices, computed once per distinct label."""
    codes, uniques = pd.factorize(text)
    starts = np.array([period_start(labels[u][1], freq) for u in uniques], dtype="datetime64[D]")
    index = np.array([period_index(labels[u][1], freq) for u in uniques], dtype="int64")
    return starts[codes], index[codes]


def _extra_columns(frame: pd.DataFrame, known: set[str], source: str) -> list[str]:
    """Refuse columns that look like misspelt bounds or quantiles; warn about the rest."""
    extras = []
    for col in frame.columns:
        if col in known or _BOUND.match(col) or _QUANTILE.match(col):
            continue
        if m := _BOUND_LIKE.match(col):
            side = "lower" if m[1] in _LOWER_WORDS else "upper"
            raise InputError(source, f"looks like an interval bound; name it {side}_{m[2]}", column=col)
        if m := _QUANTILE_LIKE.match(col):
            raise InputError(source, f"looks like a quantile; name it q{m[2].replace('.', '')} "
                             "(q10 is the 0.10 quantile)", column=col)
        extras.append(col)
    return extras


def _ignored(source: str, extras: list[str]) -> str:
    shown = list_names([shorten(c) for c in extras], 10)
    return f"{source}: ignored column{'s' if len(extras) > 1 else ''} {shown}"


def _bound_columns(frame: pd.DataFrame, source: str) -> dict[float, tuple[str, str]]:
    levels: dict[float, dict[str, str]] = {}
    for col in frame.columns:
        if m := _BOUND.match(col):
            level = float(m[2])
            if not 0 < level < 100:
                raise InputError(source, f"level {m[2]} is outside (0, 100)", column=col)
            levels.setdefault(level, {})[m[1]] = col
    for level, sides in levels.items():
        for side, other in (("lower", "upper"), ("upper", "lower")):
            if side in sides and other not in sides:
                raise InputError(source, f"has no matching {other}_{format_level(level)} column",
                                 column=sides[side])
    return {level: (sides["lower"], sides["upper"]) for level, sides in sorted(levels.items())}


def _quantile_columns(frame: pd.DataFrame, source: str) -> dict[float, str]:
    taus = {}
    for col in frame.columns:
        if m := _QUANTILE.match(col):
            digits = m[1]
            tau = float(digits) if "." in digits else float("0." + digits)
            if not 0 < tau < 1:
                raise InputError(source, f"quantile level {tau:g} is outside (0, 1)", column=col)
            taus[tau] = col
    return dict(sorted(taus.items()))


def _model_origin(source, frame, model, origin) -> tuple[np.ndarray, np.ndarray]:
    n = len(frame)
    out = []
    for column, option in (("model", model), ("origin", origin)):
        if column in frame.columns:
            values = _keys(source, frame, column)
            if option is not None:
                differ = values != str(option).strip()
                if differ.any():
                    i = int(np.argmax(differ))
                    raise InputError(source, f"{values[i]!r} differs from --{column} {option}; give one or the other",
                                     row=i + 1, column=column)
        elif option is not None:
            values = np.full(n, str(option).strip(), dtype=object)
        else:
            raise InputError(source, f"has no {column} column and no --{column} was given")
        out.append(values)
    return out[0], out[1]


def read_forecasts(
    data,
    *,
    model: str | None = None,
    origin: str | None = None,
    freq: str | None = None,
    recorded: dict[str, str] | None = None,
    name: str | None = None,
) -> ForecastFrame:
    """Read and validate a forecast file. ``recorded`` maps known series to their frequency."""
    recorded = recorded or {}
    source, frame = read_table(data, name=name)
    _require(source, frame, ("series", "period", "forecast"))
    bound_cols = _bound_columns(frame, source)
    quant_cols = _quantile_columns(frame, source)
    extras = _extra_columns(frame, {"series", "period", "forecast", "model", "origin"}, source)
    warnings = [_ignored(source, extras)] if extras else []

    models, origins = _model_origin(source, frame, model, origin)
    keys = _keys(source, frame, "series")
    period_labels, period_text = _labels(source, _keys(source, frame, "period"), "period")
    origin_labels, origin_text = _labels(source, origins, "origin")
    known = {recorded[k] for k in pd.unique(keys) if k in recorded}
    frequency = _decide_frequency(source, [("period", period_labels, period_text),
                                           ("origin", origin_labels, origin_text)], freq, known)
    _check_recorded(source, keys, frequency, recorded)
    period, p_index = _indices(period_labels, period_text, frequency)
    origin_day, o_index = _indices(origin_labels, origin_text, frequency)

    cells = pd.DataFrame({
        "model": models, "origin": origin_day, "origin_index": o_index,
        "series": keys, "period": period, "period_index": p_index,
    })
    cells["horizon"] = cells["period_index"] - cells["origin_index"]
    _check_after_origin(source, cells, frequency)
    _check_unique(source, cells, ["model", "origin_index", "series", "period_index"], "period",
                  "a second forecast for the same series, period, model and origin")
    cells["point"] = _numbers(source, frame, "forecast", allow_blank=False)
    bounds = {lv: _bounds(source, frame, lo, hi) for lv, (lo, hi) in bound_cols.items()}
    quantiles = {tau: _numbers(source, frame, col, allow_blank=True) for tau, col in quant_cols.items()}
    _check_quantile_order(source, quantiles, quant_cols)
    warnings += _point_outside(source, cells["point"].to_numpy(), bounds)
    return ForecastFrame(source, frequency, cells, bounds, quantiles, warnings)


def _check_after_origin(source: str, cells: pd.DataFrame, freq: str) -> None:
    far = (cells["horizon"] > MAX_HORIZON).to_numpy()
    if far.any():
        i = int(np.argmax(far))
        raise InputError(source, f"target period is {cells['horizon'].iloc[i]:,} periods after the origin; "
                         f"Backsight accepts horizons up to {MAX_HORIZON}", row=i + 1, column="period")
    bad = (cells["horizon"] < 1).to_numpy()
    if bad.any():
        i = int(np.argmax(bad))
        target, origin = (pd.Timestamp(cells[c].iloc[i]).date() for c in ("period", "origin"))
        raise InputError(source, f"target period {period_label(target, freq)} is not after "
                         f"the origin {period_label(origin, freq)}", row=i + 1, column="period")


def _check_unique(source: str, frame: pd.DataFrame, keys: list[str], column: str, what: str) -> None:
    dup = frame.duplicated(subset=keys, keep="first").to_numpy()
    if dup.any():
        i = int(np.argmax(dup))
        first = frame.loc[:i - 1] if i else frame.iloc[:0]
        mask = (first[keys] == frame.loc[i, keys]).all(axis=1).to_numpy()
        earlier = int(np.argmax(mask)) + 1 if mask.any() else None
        tail = f" (first at row {earlier})" if earlier else ""
        raise InputError(source, f"{what}{tail}", row=i + 1, column=column)


def _bounds(source, frame, lower_col, upper_col) -> tuple[np.ndarray, np.ndarray]:
    lower = _numbers(source, frame, lower_col, allow_blank=True)
    upper = _numbers(source, frame, upper_col, allow_blank=True)
    half = np.isnan(lower) != np.isnan(upper)
    if half.any():
        i = int(np.argmax(half))
        col, other = (upper_col, lower_col) if np.isnan(upper[i]) else (lower_col, upper_col)
        raise InputError(source, f"is empty but {other} is given; give both bounds or neither", row=i + 1, column=col)
    crossed = lower > upper
    if crossed.any():
        i = int(np.argmax(crossed))
        raise InputError(source, f"lower bound {lower[i]:g} is above the upper bound {upper[i]:g}",
                         row=i + 1, column=lower_col)
    return lower, upper


def _check_quantile_order(source, quantiles: dict[float, np.ndarray], columns: dict[float, str]) -> None:
    taus = list(quantiles)
    for a, b in zip(taus, taus[1:]):
        bad = quantiles[a] > quantiles[b]
        if bad.any():
            i = int(np.argmax(bad))
            raise InputError(source, f"quantiles decrease: {columns[a]} = {quantiles[a][i]:g} is above "
                             f"{columns[b]} = {quantiles[b][i]:g}", row=i + 1, column=columns[b])


def _point_outside(source: str, point: np.ndarray, bounds) -> list[str]:
    out = []
    for level, (lower, upper) in bounds.items():
        outside = (point < lower) | (point > upper)
        if outside.any():
            i = int(np.argmax(outside))
            out.append(f"{source}: {int(outside.sum())} point forecast(s) lie outside their own "
                       f"{format_level(level)}% interval (first at row {i + 1})")
    return out


def read_actuals(data, *, freq: str | None = None, recorded: dict[str, str] | None = None,
                 name: str | None = None) -> ActualsFrame:
    """Read and validate an actuals file (series, period, actual)."""
    recorded = recorded or {}
    source, frame = read_table(data, name=name)
    _require(source, frame, ("series", "period", "actual"))
    extras = [c for c in frame.columns if c not in ("series", "period", "actual")]
    warnings = [_ignored(source, extras)] if extras else []
    keys = _keys(source, frame, "series")
    labels, text = _labels(source, _keys(source, frame, "period"), "period")
    known = {recorded[k] for k in pd.unique(keys) if k in recorded}
    frequency = _decide_frequency(source, [("period", labels, text)], freq, known)
    _check_recorded(source, keys, frequency, recorded)
    period, p_index = _indices(labels, text, frequency)
    values = pd.DataFrame({"series": keys, "period": period, "period_index": p_index})
    _check_unique(source, values, ["series", "period_index"], "period", "a second actual for the same series and period")
    values["value"] = _numbers(source, frame, "actual", allow_blank=False)
    return ActualsFrame(source, frequency, values, warnings)
