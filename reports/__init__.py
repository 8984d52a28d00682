"""Static HTML reports rendered from a Backsight ledger (imports ``ledger``; never the reverse)."""
