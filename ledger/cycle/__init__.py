"""The monthly cycle: a review of an inbox in one call, what changed since the last review, the gate."""
