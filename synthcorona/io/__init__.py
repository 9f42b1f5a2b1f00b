"""The edges of the package: TOML input files and their schemas, the table file, writers of netCDF/ECSV/CSV/PNG, reports."""
