"""Pure array-in/array-out statistics: metrics, signals, interval tests, comparison tests.

Nothing here imports from the ledger-level layers (intake, scoring, findings, methods, cli)."""
