"""Whole computations returning xarray Datasets and tables, writing no files: forecast, cycle comparison, spectrum."""
