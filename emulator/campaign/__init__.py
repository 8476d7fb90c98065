"""Campaigns: many scenario runs from one file (matrix expansion, Dask execution,
results and their summary). See ``railrig campaign``."""
