"""One module per finding kind (drift, calibration, value, data), the shared Finding and FlagOptions,
flags, and the model comparisons (compare, standings, advise)."""
