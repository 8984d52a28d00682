"""Cells, scales and grouped aggregates in set-based SQL; attributes, weighted scores, totals; the read API."""
