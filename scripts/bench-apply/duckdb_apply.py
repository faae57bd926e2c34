#!/usr/bin/env python3
"""The peer of the apply benchmark: the same allocation done by DuckDB.

Runs the query `regionkey apply --emit-sql duckdb` wrote for the same data,
crosswalk and variables (so the peer computes what apply computes: counts
allocated by weight, coverage beside each figure), reading the same CSV
files and writing a CSV, as the command does.

Usage: duckdb_apply.py DATA CROSSWALK QUERY OUTPUT
"""
import sys

import duckdb

data, crosswalk, query, output = sys.argv[1:5]
con = duckdb.connect()
# Codes and periods as text, as apply reads them; the missing markers
# apply reads by default.
con.execute(
    "CREATE TABLE data AS SELECT * FROM read_csv(?, all_varchar=true, "
    "nullstr=['', 'NA', 'N/A', 'n/a'])",
    [data],
)
con.execute(
    "CREATE TABLE crosswalk AS SELECT * FROM read_csv(?, all_varchar=true, nullstr=[''])",
    [crosswalk],
)
sql = open(query).read().strip().rstrip(";")
con.execute(f"COPY ({sql}) TO '{output}' (HEADER, DELIMITER ',')")
