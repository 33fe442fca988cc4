"""Screening a universe of underlyings: one comparison per scenario folder, run in
local processes or on a Dask distributed cluster, gathered into one ranked table."""
