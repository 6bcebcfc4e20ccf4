"""Catalogues: the `Catalog` of black-hole and host masses (one row an object) and the readers and
writers of catalogue files (CSV, ECSV, FITS, Parquet), with row-level validation that names file,
row, column and value.
"""
