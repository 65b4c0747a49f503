"""Out-of-core intake: data files read by DuckDB, the rows never loaded into Python.

For large files (and for globs of many files) :func:`reporter.intake.duck.reader.load_out_of_core`
reads CSV, TSV or Parquet with DuckDB and returns a :class:`~reporter.intake.data.Dataset` that
carries the cell table (:class:`~reporter.intake.cells.CellStats`) and a
:class:`~reporter.intake.duck.rows.DuckRows`, the DuckDB answer to the row-access questions
(:mod:`reporter.intake.rows`); its per-row arrays are empty.

One module per job:

- :mod:`.files`: which files a path names (globs), their hashes, text headers and the row
  numbers a person finds;
- :mod:`.connection`: the DuckDB connection and its limits, SQL literals, the progress bar, and
  DuckDB's reading errors turned into one-line messages;
- :mod:`.levels`: factor values matched to the plan's levels;
- :mod:`.outcome`: the outcome's text checks and the exact-decimal offset from the pivot, in SQL;
- :mod:`.reader`: the two scans that read the files into one compact table;
- :mod:`.cell_table`: per-cell n, mean and centred SS in SQL;
- :mod:`.rows`: :class:`~reporter.intake.duck.rows.DuckRows`, the row-level statistics by SQL.

**Resources.** DuckDB runs with ``memory_limit`` = :data:`.connection.MEMORY_LIMIT` and at most
:data:`.connection.MAX_THREADS` threads, its temporary files in a private folder removed when the
data set is closed or collected.
"""
