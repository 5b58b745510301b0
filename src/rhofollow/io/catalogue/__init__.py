"""Read and validate candidate catalogues (CSV, ECSV, VOTable): the project's input boundary.

:func:`read_catalogue` turns a file into a :class:`~rhofollow.core.types.CatalogueResult`; every problem
becomes a :class:`~rhofollow.core.types.RowIssue` naming the file, the 1-based data row, the column and
the reason. A bad row is skipped; every good row is kept.

Modules: ``columns`` (the column table, units, accepted ranges), ``tables`` (the raw CSV / ECSV /
VOTable readers), ``binding`` (file columns to canonical columns, unit conversion, cell parsing),
``checks`` (one row's checks), ``reader`` (:func:`read_catalogue`).
"""
from rhofollow.io.catalogue.columns import COLUMNS, CatalogueError, ColumnSpec, PHYSICAL_RANGES, SUPPORTED_EXTENSIONS
from rhofollow.io.catalogue.reader import read_catalogue

__all__ = ["CatalogueError", "ColumnSpec", "COLUMNS", "read_catalogue", "SUPPORTED_EXTENSIONS",
           "PHYSICAL_RANGES"]
