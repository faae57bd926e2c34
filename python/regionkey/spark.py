"""regionkey on Spark: tables too large for one machine.

The plan (docs/spark.md has it in full):

1. **Match distinct names once, on the driver.** A table of millions of rows
   names a few thousand places. :func:`match_names` collects the distinct
   (name, state[, year]) keys, matches them with :func:`regionkey.match`
   (the library, in memory), and joins the result back onto the rows as a
   broadcast join: no Python runs per row.
2. **Allocate in the engine.** :func:`allocate` registers the data and the
   crosswalk as views and runs the SQL of ``regionkey apply --emit-sql
   spark`` (:func:`regionkey.apply_sql`): allocation, ratios, means and
   coverage are Spark SQL aggregations that scale with the cluster.

Allocated figures are estimates (values are assumed spread evenly within
each source unit); see :data:`regionkey.CAUTION`.
"""

from __future__ import annotations

from typing import Any, Dict, Optional, Sequence, Tuple, Union

import regionkey

__all__ = ["match_names", "allocate"]


def match_names(
    df: Any,
    name_column: str,
    state_column: Optional[str] = None,
    vintage: Optional[int] = None,
    vintage_column: Optional[str] = None,
    decisions: Any = None,
    level: Optional[str] = None,
    reference: Any = None,
) -> Tuple[Any, Any]:
    """Adds the columns of :func:`regionkey.match` to a Spark DataFrame.

    Returns ``(matched, review)``: ``matched`` is ``df`` with ``code``,
    ``code_name``, ``match_status``, ``match_method``, ``match_score``,
    ``note`` and ``candidates`` (the same values the command gives each
    row); ``review`` is a pandas DataFrame of the names that need a
    decision, whose ``rows`` counts distinct keys, not data rows.
    """
    from pyspark.sql import functions as F
    from pyspark.sql.types import StringType, StructField, StructType

    keys = [c for c in (name_column, state_column, vintage_column) if c is not None]
    distinct = df.select(*[F.col(c).cast("string").alias(c) for c in keys]).distinct()
    local = distinct.toPandas()
    added = list(regionkey.ADDED_COLUMNS)
    if any(c in df.columns for c in added):
        added = [regionkey.COLUMN_PREFIX + c for c in added]
    matched, review = regionkey.match(
        local,
        name_column=name_column,
        state_column=state_column,
        vintage=vintage,
        vintage_column=vintage_column,
        decisions=decisions,
        level=level,
        reference=reference,
    )
    schema = StructType([StructField(c, StringType(), True) for c in keys + added])
    spark = df.sparkSession
    table = spark.createDataFrame(matched[keys + added].astype(object), schema=schema)
    # Null-safe equality: a row with no name meets the key with no name.
    right = table.select(*[F.col(c).alias(f"__rk_{c}") for c in keys], *added)
    condition = None
    for c in keys:
        term = F.col(c).cast("string").eqNullSafe(F.col(f"__rk_{c}"))
        condition = term if condition is None else condition & term
    joined = df.join(F.broadcast(right), on=condition, how="left")
    return joined.drop(*[f"__rk_{c}" for c in keys]), review


def allocate(
    data: Any,
    crosswalk: Any,
    *,
    code_column: str = "code",
    state_column: Optional[str] = None,
    period_column: Optional[str] = None,
    codes: str = "county",
    sum: Sequence[str] = (),
    ratio: Union[Dict[str, str], Sequence[str]] = (),
    mean: Sequence[str] = (),
    min_coverage: float = 0.0,
    views: Tuple[str, str] = ("regionkey_data", "regionkey_crosswalk"),
) -> Any:
    """Carries ``data`` onto the crosswalk's targets in Spark SQL, as
    ``regionkey apply --crosswalk`` does: per target (and period) each figure
    and ``NAME_coverage``. ``crosswalk`` is a Spark DataFrame with
    ``from_code, to_code, weight, target_share``. Both are registered as
    temporary views named by ``views``.
    """
    data.createOrReplaceTempView(views[0])
    crosswalk.createOrReplaceTempView(views[1])
    query = regionkey.apply_sql(
        "spark",
        data_table=views[0],
        crosswalk_table=views[1],
        code_column=code_column,
        state_column=state_column,
        period_column=period_column,
        codes=codes,
        sum=sum,
        ratio=ratio,
        mean=mean,
        min_coverage=min_coverage,
    )
    return data.sparkSession.sql(query.rstrip().rstrip(";"))
