"""Planning: the grid and its samples computed from indices, operator files, the dask task."""
