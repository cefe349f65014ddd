"""Many cases: discovery, local or Dask workers, resume, the SQLite results store."""
