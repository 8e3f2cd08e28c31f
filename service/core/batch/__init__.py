"""Many series at once: layout and chunks, the compiled engine, columnar results, Arrow
tables in and tidy tables out, pandas and Dask."""
