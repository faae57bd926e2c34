"""regionkey from Python: match place names to FIPS codes and carry data
across boundary vintages, on pandas or polars DataFrames.

The functions call the same Rust library as the ``regionkey`` command; the
results are the command's (the same added columns, the same review list,
the same figures and coverage). Columns cross into the library as Arrow
buffers, never row by row in Python.

A DataFrame comes back of the kind that went in (pandas in, pandas out;
polars in, polars out). Errors raise :class:`RegionkeyError` carrying the
command's message.

Allocated figures are estimates: they assume a value is spread evenly by
area or by population within each unit. Where figures feed legal or
funding decisions, official relationship files and local practice take
precedence.

>>> import pandas as pd, regionkey
>>> df = pd.DataFrame({"county": ["St Louis City", "Dona Ana", "Wade Hampton"],
...                    "state": ["MO", "NM", "AK"]})
>>> matched, review = regionkey.match(df, name_column="county", state_column="state")
>>> list(matched["code"])
['29510', '35013', '02158']
"""

from __future__ import annotations

import os
import shutil
import tempfile
from typing import Any, Dict, Iterable, List, Optional, Sequence, Tuple, Union

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

from . import _regionkey
from ._regionkey import CAUTION, RegionkeyError

__all__ = [
    "match",
    "apply",
    "apply_sql",
    "overlay",
    "history",
    "counties",
    "states",
    "RegionkeyError",
    "CAUTION",
    "ADDED_COLUMNS",
]

#: The columns :func:`match` adds, in order (prefixed with ``rk_`` when the
#: input already has a column of one of these names).
ADDED_COLUMNS: Tuple[str, ...] = (  # core::match_table::ADDED_COLUMNS
    "code",
    "code_name",
    "match_status",
    "match_method",
    "match_score",
    "note",
    "candidates",
)

#: Prefix of the added columns when the input already uses one of their names.
COLUMN_PREFIX = "rk_"

PathLike = Union[str, "os.PathLike[str]"]


# --- DataFrames <-> Arrow -------------------------------------------------


def _kind(df: Any) -> str:
    mod = type(df).__module__.split(".")[0]
    if mod == "polars":
        return "polars"
    if mod == "pandas":
        return "pandas"
    if isinstance(df, pa.Table):
        return "arrow"
    raise TypeError(
        f"expected a pandas or polars DataFrame (or a pyarrow Table), got {type(df).__name__}"
    )


def _to_arrow(df: Any) -> pa.Table:
    kind = _kind(df)
    if kind == "polars":
        return df.to_arrow()
    if kind == "pandas":
        return pa.Table.from_pandas(df, preserve_index=False)
    return df


def _from_arrow(table: pa.Table, kind: str) -> Any:
    if kind == "polars":
        import polars as pl

        return pl.from_arrow(table)
    if kind == "pandas":
        return table.to_pandas()
    return table


def _text(array: Any) -> pa.Array:
    """A column as one large-string array, nulls as empty strings."""
    if isinstance(array, pa.ChunkedArray):
        array = array.combine_chunks() if array.num_chunks != 1 else array.chunk(0)
    if pa.types.is_dictionary(array.type):
        array = array.dictionary_decode()
    if not pa.types.is_large_string(array.type):
        array = array.cast(pa.large_string())
    return pc.fill_null(array, "")


def _buffers(array: pa.Array) -> Tuple[bytes, bytes, int, int]:
    """The offsets and bytes of a large-string array (copied once)."""
    _, offsets, data = array.buffers()
    return (
        offsets.to_pybytes(),
        data.to_pybytes() if data is not None else b"",
        array.offset,
        len(array),
    )


def _column(table: pa.Table, name: Optional[str], option: str) -> Optional[pa.Array]:
    if name is None:
        return None
    if name not in table.column_names:
        raise RegionkeyError(
            f'the DataFrame: no column "{name}"; the columns are: '
            + ", ".join(table.column_names)
        )
    return _text(table.column(name))


# --- match ----------------------------------------------------------------


def _decisions_path(decisions: Any, workdir: str) -> Optional[str]:
    if decisions is None:
        return None
    if isinstance(decisions, (str, os.PathLike)):
        return os.fspath(decisions)
    table = _to_arrow(decisions)
    path = os.path.join(workdir, "decisions.csv")
    pacsv.write_csv(table, path)
    return path


def match(
    df: Any,
    name_column: str,
    state_column: Optional[str] = None,
    vintage: Optional[int] = None,
    vintage_column: Optional[str] = None,
    decisions: Any = None,
    level: Optional[str] = None,
    reference: Optional[PathLike] = None,
    composites: Optional[PathLike] = None,
) -> Tuple[Any, Any]:
    """Match free-text place names to FIPS codes, as ``regionkey match`` does.

    Returns ``(matched, review)``: ``matched`` is every input row, in input
    order, with the command's added columns (``code``, ``code_name``,
    ``match_status``, ``match_method``, ``match_score``, ``note``,
    ``candidates``; written as the command writes them, so a CSV of it has
    the command's bytes); ``review`` has one row per distinct (name, state)
    that needs a decision, with the review file's columns. Fill in
    ``chosen_code`` and pass ``review`` (or a CSV path) back as
    ``decisions``.

    ``vintage`` picks the year whose units are matched (default: the latest,
    2023); ``vintage_column`` takes each row's year instead. ``level`` is
    ``"county"`` (default) or ``"state"``; ``reference`` is a CSV of your own
    units (``code,name``; optional ``parent``, ``parent_name``,
    ``description``, ``valid_from``, ``valid_to``); ``composites`` a CSV of
    units reported together (as ``--composites``).

    The columns are checked as the command checks them: a state column
    whose values are not states (years, say), or a name column of numbers
    that are no codes, raise :class:`RegionkeyError` naming the column, the
    row (as a line, the header being line 1) and a value.

    >>> import polars as pl, regionkey
    >>> df = pl.DataFrame({"name": ["Baltimore", "Fairfax city", "Statewide"],
    ...                    "st": ["MD", "VA", "VA"]})
    >>> m, review = regionkey.match(df, name_column="name", state_column="st")
    >>> m.select("name", "code", "match_status").rows()
    [('Baltimore', '', 'review'), ('Fairfax city', '51600', 'matched'), ('Statewide', '', 'unmatched')]
    >>> review["name"].to_list()
    ['Baltimore', 'Statewide']
    >>> regionkey.match(df, name_column="county")
    Traceback (most recent call last):
    ...
    regionkey.RegionkeyError: the DataFrame: no column "county"; the columns are: name, st
    """
    kind = _kind(df)
    if kind == "pandas":
        # Only the key columns cross into Arrow; the other columns stay as
        # they are (a whole-frame round trip through Arrow costs more than
        # the matching).
        table = None
        column_names = [str(c) for c in df.columns]

        def key_column(name: Optional[str]) -> Optional[pa.Array]:
            if name is None:
                return None
            if name not in column_names:
                raise RegionkeyError(
                    f'the DataFrame: no column "{name}"; the columns are: '
                    + ", ".join(column_names)
                )
            column = df[name]
            try:
                return _text(pa.array(column, from_pandas=True))
            except (pa.ArrowTypeError, pa.ArrowInvalid):
                # A column of mixed objects (numbers among text): as text.
                text = column.map(lambda v: None if v is None or v != v else str(v))
                return _text(pa.array(text, type=pa.large_string()))

        names, states, years = (key_column(c) for c in (name_column, state_column, vintage_column))
    else:
        table = _to_arrow(df)
        column_names = table.column_names
        names = _column(table, name_column, "name_column")
        states = _column(table, state_column, "state_column")
        years = _column(table, vintage_column, "vintage_column")
    if vintage is not None and vintage_column is not None:
        raise RegionkeyError("give vintage or vintage_column, not both")
    added = list(ADDED_COLUMNS)
    if any(c in column_names for c in added):
        added = [COLUMN_PREFIX + c for c in added]
        taken = [c for c in added if c in column_names]
        if taken:
            raise RegionkeyError(
                "the DataFrame: line 1: column {!r}: the input already has columns named like "
                "the ones match adds ({} and {}); rename them".format(
                    taken[0], taken[0][len(COLUMN_PREFIX):], taken[0]
                )
            )
    workdir = tempfile.mkdtemp(prefix="regionkey-")
    try:
        result = _regionkey.match_columns(
            _buffers(names),
            _buffers(states) if states is not None else None,
            _buffers(years) if years is not None else None,
            vintage,
            level,
            os.fspath(reference) if reference is not None else None,
            os.fspath(composites) if composites is not None else None,
            _decisions_path(decisions, workdir),
            "the DataFrame",
            name_column,
            state_column,
            vintage_column,
        )
    finally:
        shutil.rmtree(workdir, ignore_errors=True)
    review = pa.table(result["review"])
    if kind == "pandas":
        import numpy as np

        ids_np = np.frombuffer(result["row_ids"], dtype=np.uint32)
        out = df.reset_index(drop=True)
        for name, values in zip(added, result["distinct"]):
            out[name] = np.asarray(values, dtype=object)[ids_np]
        return out, review.to_pandas()
    ids = pa.Array.from_buffers(
        pa.uint32(), len(names), [None, pa.py_buffer(result["row_ids"])]
    )
    columns = []
    for values in result["distinct"]:
        dictionary = pa.array(values, type=pa.string())
        columns.append(dictionary.take(ids))
    out = table
    for name, column in zip(added, columns):
        out = out.append_column(name, column)
    return _from_arrow(out, kind), _from_arrow(review, kind if kind != "arrow" else "arrow")


# --- apply and overlay (the library's configuration and execute) ---------


def _call(function: Any, args: Tuple[Any, ...], names: Dict[str, str]) -> Any:
    """Calls the library on temporary files; messages name the DataFrames,
    not the temporary files (line N of a DataFrame is row N - 2, the header
    being line 1)."""
    try:
        return function(*args)
    except RegionkeyError as e:
        message = str(e)
        for path, name in names.items():
            message = message.replace(path, name)
        raise RegionkeyError(message) from None


def _read_result(path: str, text_columns: Iterable[str], figures: bool = True) -> pa.Table:
    """A table the command wrote: the named columns as text, whole-number
    columns as floats (a figure of 100 is written "100" but is a float)."""
    text = list(text_columns)
    table = pacsv.read_csv(
        path,
        convert_options=pacsv.ConvertOptions(
            column_types={c: pa.string() for c in text},
            strings_can_be_null=False,
            null_values=[""],
        ),
    )
    for i, field in enumerate(table.schema):
        if figures and field.name not in text and (pa.types.is_integer(field.type) or pa.types.is_null(field.type)):
            table = table.set_column(i, field.name, table.column(i).cast(pa.float64()))
    return table


def apply(
    df: Any,
    crosswalk: Any = None,
    *,
    to_vintage: Optional[int] = None,
    code_column: str = "code",
    state_column: Optional[str] = None,
    period_column: Optional[str] = None,
    sum: Sequence[str] = (),
    ratio: Union[Dict[str, str], Sequence[str]] = (),
    mean: Sequence[str] = (),
    min_coverage: float = 0.0,
    decimals: Optional[int] = None,
    missing: Sequence[str] = ("NA",),
    all_units: bool = False,
    report: bool = False,
) -> Any:
    """Carry a table onto target units through a crosswalk, as ``regionkey apply`` does.

    ``crosswalk`` is a DataFrame or a path (``from_code, to_code, weight,
    target_share, basis``); with ``to_vintage`` county codes are carried
    through the change history (and ``crosswalk`` may be left out).
    ``sum`` lists count columns; ``ratio`` maps ``NAME`` to
    ``"NUMERATOR/DENOMINATOR"`` (or lists ``"NAME=NUM/DEN"``); ``mean`` lists
    ``"COL"`` or ``"COL:WEIGHT"``. The result has, per target code (and
    period), each figure and ``NAME_coverage``: the part of the target made
    of sources with a known value. A figure with no known source is null with
    coverage 0: missing is never summed as zero. With ``report=True`` returns
    ``(result, report)`` where ``report`` lists every row left out or worth a
    look (kind, code, period, rows, first_line, detail).

    Figures are estimates (values are assumed spread evenly within each
    source unit): see :data:`CAUTION`.

    >>> import pandas as pd, regionkey
    >>> data = pd.DataFrame({"fips": ["1001", "01003"], "pop": [100.0, None]})
    >>> cw = pd.DataFrame({"from_code": ["01001", "01003"], "to_code": ["X", "X"],
    ...                    "weight": [1.0, 1.0], "target_share": [0.25, 0.75],
    ...                    "basis": ["area", "area"]})
    >>> out = regionkey.apply(data, cw, code_column="fips", sum=["pop"])
    >>> out[["fips", "pop", "pop_coverage"]].values.tolist()
    [['X', 100.0, 0.25]]
    """
    kind = _kind(df)
    table = _to_arrow(df)
    workdir = tempfile.mkdtemp(prefix="regionkey-")
    try:
        data_path = os.path.join(workdir, "data.csv")
        pacsv.write_csv(table, data_path)
        cw_path = None
        if crosswalk is not None:
            if isinstance(crosswalk, (str, os.PathLike)):
                cw_path = os.fspath(crosswalk)
            else:
                cw_path = os.path.join(workdir, "crosswalk.csv")
                pacsv.write_csv(_to_arrow(crosswalk), cw_path)
        ratios = [f"{k}={v}" for k, v in ratio.items()] if isinstance(ratio, dict) else list(ratio)
        out_path = os.path.join(workdir, "result.csv")
        report_path = os.path.join(workdir, "report.csv")
        _call(
            _regionkey.apply_files,
            (
                data_path,
                cw_path,
                to_vintage,
                code_column,
                state_column,
                period_column,
                list(sum),
                ratios,
                list(mean),
                float(min_coverage),
                decimals,
                list(missing),
                bool(all_units),
                out_path,
                report_path if report else None,
            ),
            {data_path: "the DataFrame", os.path.join(workdir, "crosswalk.csv"): "the crosswalk DataFrame"},
        )
        text = [code_column, "code_name", "rk_code_name"] + ([period_column] if period_column else [])
        result = _read_result(out_path, [c for c in text if c])
        result = result.replace_schema_metadata({"caution": CAUTION})
        out = _from_arrow(result, kind)
        if report:
            rep = _read_result(report_path, ["kind", "code", "period", "detail"], figures=False)
            return out, _from_arrow(rep, kind)
        return out
    finally:
        shutil.rmtree(workdir, ignore_errors=True)


def _variables(
    sum: Sequence[str], ratio: Union[Dict[str, str], Sequence[str]], mean: Sequence[str]
) -> List[Tuple[str, str, str, Optional[str]]]:
    out: List[Tuple[str, str, str, Optional[str]]] = [("sum", c, c, None) for c in sum]
    ratios = [f"{k}={v}" for k, v in ratio.items()] if isinstance(ratio, dict) else list(ratio)
    for r in ratios:
        name, _, rest = r.partition("=")
        num, _, den = rest.partition("/")
        if not (name.strip() and num.strip() and den.strip()):
            raise RegionkeyError(
                f"--ratio {r!r}: expected NAME=NUMERATOR/DENOMINATOR, e.g. rate=unemployed/labor_force"
            )
        out.append(("ratio", name.strip(), num.strip(), den.strip()))
    for m in mean:
        column, _, weight = m.partition(":")
        out.append(("mean", column.strip(), column.strip(), weight.strip() or None))
    return out


def apply_sql(
    dialect: str,
    *,
    data_table: str = "data",
    crosswalk_table: str = "crosswalk",
    code_column: str = "code",
    state_column: Optional[str] = None,
    period_column: Optional[str] = None,
    codes: str = "county",
    sum: Sequence[str] = (),
    ratio: Union[Dict[str, str], Sequence[str]] = (),
    mean: Sequence[str] = (),
    min_coverage: float = 0.0,
    crosswalk_has_origin: bool = False,
) -> str:
    """The SQL query that does :func:`apply`'s allocation, ratios, means and
    coverage in an engine (``"duckdb"``, ``"spark"`` or ``"ansi"``), on the
    data and the crosswalk as tables: what ``regionkey apply --emit-sql``
    writes.

    The crosswalk table has ``from_code, to_code, weight, target_share``;
    ``codes`` says how the data's codes are read (``"county"``: five-digit
    FIPS, lost leading zeros restored; ``"state"``; ``"digits:11"``: all-digit
    codes of that width, such as tract GEOIDs; ``"text"``: as written).
    Figures come out unrounded; allocated figures are estimates.

    >>> import duckdb, regionkey
    >>> con = duckdb.connect()
    >>> _ = con.execute("CREATE TABLE data AS SELECT * FROM (VALUES ('1001', 10.0), ('1003', NULL)) t(fips, pop)")
    >>> _ = con.execute("CREATE TABLE crosswalk AS SELECT * FROM (VALUES ('01001', 'T', 1.0, 0.4), ('01003', 'T', 1.0, 0.6)) t(from_code, to_code, weight, target_share)")
    >>> con.execute(regionkey.apply_sql("duckdb", code_column="fips", sum=["pop"])).fetchall()
    [('T', 10.0, 0.4)]
    >>> [d[0] for d in con.description]
    ['fips', 'pop', 'pop_coverage']
    """
    return _regionkey.sql_query(
        dialect,
        data_table,
        crosswalk_table,
        crosswalk_has_origin,
        code_column,
        state_column,
        period_column,
        codes,
        _variables(sum, ratio, mean),
        float(min_coverage),
    )


def overlay(
    from_layer: PathLike,
    to_layer: PathLike,
    *,
    from_key: Optional[str] = None,
    to_key: Optional[str] = None,
    from_object: Optional[str] = None,
    to_object: Optional[str] = None,
    weight: str = "area",
    population: Optional[PathLike] = None,
    population_field: Optional[str] = None,
    min_share: Optional[float] = None,
    as_polars: bool = False,
) -> Any:
    """Build a crosswalk between two boundary layers by polygon overlay.

    Layers are GeoJSON, TopoJSON or Shapefile paths, or the built-in
    ``"builtin:counties-2017"`` and ``"builtin:counties-2023"``. Returns a
    DataFrame (pandas, or polars with ``as_polars=True``) with ``from_code,
    to_code, weight, target_share, basis``, the rows ``regionkey overlay``
    writes (here unrounded; the file has 12 decimals). Weights are shares of
    the source by area on the WGS84 ellipsoid (or by population with
    ``weight="population"``).

    >>> import regionkey
    >>> cw = regionkey.overlay("builtin:counties-2017", "builtin:counties-2023")
    >>> cw[cw["from_code"] == "09003"]["to_code"].tolist()
    ['09110', '09140', '09160', '09170']
    """
    if weight not in ("area", "population"):
        raise RegionkeyError(f'weight {weight!r}: choose "area" or "population"')
    workdir = tempfile.mkdtemp(prefix="regionkey-")
    try:
        # The library writes the crosswalk file and its sidecar (they are
        # dropped); the columns come back from memory.
        columns = _regionkey.overlay_layers(
            os.fspath(from_layer),
            os.fspath(to_layer),
            from_key,
            to_key,
            from_object,
            to_object,
            weight,
            os.fspath(population) if population is not None else None,
            population_field,
            float(min_share) if min_share is not None else None,
            os.path.join(workdir, "crosswalk.csv"),
        )
        table = pa.table(
            {
                "from_code": pa.array(columns["from_code"], type=pa.string()),
                "to_code": pa.array(columns["to_code"], type=pa.string()),
                "weight": pa.array(columns["weight"], type=pa.float64()),
                "target_share": pa.array(columns["target_share"], type=pa.float64()),
                "basis": pa.array(columns["basis"], type=pa.string()),
            }
        )
        return _from_arrow(table, "polars" if as_polars else "pandas")
    finally:
        shutil.rmtree(workdir, ignore_errors=True)


# --- history and references ---------------------------------------------


def history(code_or_name: str, as_polars: bool = False) -> Any:
    """A county's story since 1970: its names and codes, what it absorbed or
    split into, with years and sources (``regionkey history``).

    >>> import regionkey
    >>> h = regionkey.history("Wade Hampton")
    >>> h[["year", "event", "code"]].values.tolist()
    [[1970, 'era', '02270'], [2015, 'renamed', '02270']]
    >>> regionkey.history("Atlantis")
    Traceback (most recent call last):
    ...
    regionkey.RegionkeyError: "Atlantis" is not a county code or county name of any vintage since 1970 in the built-in reference
    """
    columns = _regionkey.history(code_or_name)
    table = pa.table(columns)
    return _from_arrow(table, "polars" if as_polars else "pandas")


def counties(vintage: Optional[int] = None, as_polars: bool = False) -> Any:
    """The built-in US counties and equivalents: ``code, name, description,
    full_name, parent, valid_from, valid_to`` (``valid_to`` empty while still
    valid); with ``vintage``, only the units of that year.

    >>> import regionkey
    >>> c = regionkey.counties(2023)
    >>> len(c), c[c["code"] == "06037"]["full_name"].item()
    (3235, 'Los Angeles County')
    """
    table = pa.table(_regionkey.reference_table("county", vintage))
    return _from_arrow(table, "polars" if as_polars else "pandas")


def states(as_polars: bool = False) -> Any:
    """The built-in US states and equivalents: ``code, name, description,
    full_name, parent, valid_from, valid_to``.

    >>> import regionkey
    >>> s = regionkey.states()
    >>> s[s["code"] == "06"]["name"].item()
    'California'
    """
    table = pa.table(_regionkey.reference_table("state", None))
    return _from_arrow(table, "polars" if as_polars else "pandas")
