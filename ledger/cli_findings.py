"""CLI commands for findings and comparisons: flags, compare, standings, advise (issue in progress)."""
