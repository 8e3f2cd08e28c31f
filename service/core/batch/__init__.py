"""Many series at once: layout and chunks, the compiled engine, columnar results,
pandas and Dask."""
