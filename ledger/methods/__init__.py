"""Reference forecasting methods, the rolling-origin engine, and backtests recorded through the ledger."""
