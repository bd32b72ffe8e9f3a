"""Chunk scheduling of studies (in-process, local processes, Dask), progress and cancel."""
