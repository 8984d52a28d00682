"""Reading input (CSV, Parquet, DataFrames), validating it, staging it and recording it."""
