"""Numbers in the formats of the trade: fixed decimals by unit, no scientific notation, unknown kept unknown.

One rule per unit suffix of a column name (``distance_nm``, ``max_lwc_g_m3``, ...), used by every report: the
terminal table, CSV, JSON and HTML. Files meant for programs (CSV, JSON) keep the units of the column names and
write unknown values as an empty cell (CSV) or ``null`` (JSON), never ``NaN``; text for people writes a dash.
Times are ISO 8601 UTC with a ``Z``. Only the standard library is imported at module level (the ``icing``
command starts fast); pandas and numpy come with the frame handed in.
"""

from __future__ import annotations

import math
from datetime import UTC, datetime

__all__ = ["decimals", "format_number", "format_value", "frame_to_csv", "frame_records", "iso_utc", "is_missing",
           "KT_PER_MS"]

KT_PER_MS = 3600.0 / 1852.0  # 1 kt = 1 nmi/h, 1 nmi = 1852 m exactly (international nautical mile, 1929)

# (suffix or exact name, decimals): the first match wins, exact names before suffixes.
_EXACT = {
    "segment": 0, "icing_minutes": 1, "warm_surface_minutes": 1, "reference_body_diameter_m": 3,
    "time_step_s": 0, "latitude": 4, "longitude": 4, "coverage": 2, "duration_s": 0, "time_s": 0,
    "offset_ft": 0, "level": 0, "wind_direction": 0, "relative_humidity": 0,
}
_SUFFIX = [
    ("_mm_per_h", 1), ("_g_m3", 2), ("_ft", 0), ("_nm", 1), ("_km", 1), ("_hpa", 1), ("_c", 1), ("_um", 1),
    ("_mm", 2), ("_minutes", 1), ("_h", 1), ("_kt", 0), ("_ms", 1), ("_m", 0), ("_pct", 0),
    ("_deg", 0), ("_s", 0),
]
DEFAULT_DECIMALS = 3


def decimals(column: str) -> int:
    """Decimals shown for a column, from its name's unit suffix (3 when the name carries no unit)."""
    if column in _EXACT:
        return _EXACT[column]
    for qualifier in ("_min", "_max", "_mean"):  # altitude_ft_min: the unit sits before the qualifier
        if column.endswith(qualifier):
            return decimals(column[: -len(qualifier)])
    for suffix, n in _SUFFIX:
        if column.endswith(suffix):
            return n
    return DEFAULT_DECIMALS


def is_missing(v) -> bool:
    """None, NaN, NaT or pandas' NA."""
    if v is None:
        return True
    try:
        return bool(v != v)  # NaN and NaT are not equal to themselves
    except (TypeError, ValueError):
        return False


def format_number(v, places: int, *, grouping: bool = False, missing: str = "") -> str:
    """Fixed decimals, never scientific notation, no negative zero; ``missing`` for an unknown value."""
    if is_missing(v):
        return missing
    x = float(v)
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    text = f"{x:,.{places}f}" if grouping else f"{x:.{places}f}"
    if text.startswith("-") and float(text.replace(",", "")) == 0.0:
        text = text[1:]
    return text


def iso_utc(v) -> str:
    """ISO 8601 UTC with seconds and ``Z``: from a string (kept), datetime, numpy/pandas time or epoch seconds."""
    if isinstance(v, str):
        return v
    if hasattr(v, "to_pydatetime"):  # pandas Timestamp
        v = v.to_pydatetime()
    elif type(v).__name__ == "datetime64":
        import numpy as np

        v = datetime.fromtimestamp(int(v.astype("datetime64[s]").astype(np.int64)), tz=UTC)
    elif isinstance(v, int | float):
        v = datetime.fromtimestamp(float(v), tz=UTC)
    if isinstance(v, datetime):
        if v.tzinfo is None:
            v = v.replace(tzinfo=UTC)
        return v.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    return str(v)


def _is_time(v) -> bool:
    return isinstance(v, datetime) or type(v).__name__ in ("Timestamp", "datetime64")


def format_value(v, column: str = "", *, missing: str = "", grouping: bool = False) -> str:
    """One cell as text: numbers by :func:`decimals`, times as ISO UTC, booleans ``true``/``false``."""
    if is_missing(v):
        return missing
    if isinstance(v, bool) or type(v).__name__ == "bool_":
        return "true" if v else "false"
    if _is_time(v):
        return iso_utc(v)
    if isinstance(v, int) or type(v).__name__.startswith(("int", "uint")):
        return f"{int(v):,d}" if grouping else str(int(v))
    if isinstance(v, float) or type(v).__name__.startswith("float"):
        return format_number(v, decimals(column), grouping=grouping, missing=missing)
    return str(v)


def _json_value(v, column):
    if is_missing(v):
        return None
    if isinstance(v, bool) or type(v).__name__ == "bool_":
        return bool(v)
    if _is_time(v):
        return iso_utc(v)
    if isinstance(v, int) or type(v).__name__.startswith(("int", "uint")):
        return int(v)
    if isinstance(v, float) or type(v).__name__.startswith("float"):
        x = float(v)
        if math.isinf(x):
            return None
        x = round(x, decimals(column))
        return 0.0 if x == 0 else x
    if isinstance(v, list | tuple):
        return [_json_value(x, column) for x in v]
    if isinstance(v, dict):
        return {k: _json_value(x, k) for k, x in v.items()}
    return str(v)


def json_value(v, column: str = ""):
    """A JSON-ready value (RFC 8259): unknown as None (``null``), floats rounded as :func:`decimals` says."""
    return _json_value(v, column)


def frame_records(frame) -> list[dict]:
    """The rows of a DataFrame as JSON-ready dicts (see :func:`json_value`); categoricals as their labels."""
    cols = list(frame.columns)
    out = []
    for row in frame.itertuples(index=False, name=None):
        out.append({c: _json_value(v, c) for c, v in zip(cols, row, strict=True)})
    return out


def frame_to_csv(frame, *, comment: str | None = None) -> str:
    """A DataFrame as CSV (RFC 4180) with fixed decimals per column, empty cells for unknown values.

    ``comment`` goes first as a ``# ...`` line (the caution)."""
    import csv
    import io

    buf = io.StringIO()
    if comment:
        buf.write(f"# {comment}\n")
    w = csv.writer(buf, lineterminator="\n")
    cols = [str(c) for c in frame.columns]
    w.writerow(cols)
    for row in frame.itertuples(index=False, name=None):
        w.writerow([format_value(v, c) for c, v in zip(cols, row, strict=True)])
    return buf.getvalue()
