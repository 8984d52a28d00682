"""pandas and pyarrow, imported on first use, so that a command loads only what it runs.

``import pandas`` costs about 0.45 s of CPU, more than the rest of a command's start-up
together (pyarrow: 0.06 s more). Modules write ``from ..lazy import pandas as pd`` (likewise
``pyarrow as pa``, ``pyarrow_compute as pc``): the name is a stand-in whose first attribute
lookup imports the module and puts the attribute in place, so later lookups cost what a
module's do. ``importlib.util.LazyLoader`` does not help here: pandas reads its own attributes
while it loads. Annotations stay strings (``from __future__ import annotations``), so a type
hint loads nothing.

A command that will need pandas anyway (``scores`` returns a data frame; ``snapshot`` converts
Arrow batches, and pyarrow imports pandas for that) calls :func:`preload` first: the import
runs in a daemon thread while the main thread opens the ledger and DuckDB's threads, which do
not hold the GIL, run the queries. Python's per-module import locks make a lookup on the main
thread wait for that import rather than start a second one. On two cores that DuckDB already
keeps busy the overlap gains little (DEVELOPERS.md, "Latest figures"); the commands that never
touch pandas (``--help``, ``verify``) gain the most.
"""

from __future__ import annotations

import importlib
import sys
import threading

__all__ = ["pandas", "preload", "pyarrow", "pyarrow_compute"]


class _OnFirstUse:
    """A module's stand-in: imports it on the first attribute lookup."""

    def __init__(self, name: str):
        self.__dict__["_name"] = name

    def __getattr__(self, attr: str):
        name = self.__dict__.get("_name")
        if name is None:    # a copy being rebuilt, before its state is set
            raise AttributeError(attr)
        value = getattr(importlib.import_module(name), attr)
        self.__dict__[attr] = value      # later lookups find it without coming here
        return value

    def __reduce__(self):
        # A function sent to Spark's Python workers (cloudpickle) takes the module itself along,
        # as it would a module it had imported.
        return importlib.import_module, (self.__dict__["_name"],)

    def __repr__(self) -> str:
        return f"<{self.__dict__['_name']}, loaded on first use>"


pandas = _OnFirstUse("pandas")
pyarrow = _OnFirstUse("pyarrow")
pyarrow_compute = _OnFirstUse("pyarrow.compute")


def preload(name: str = "pandas") -> threading.Thread | None:
    """Start importing ``name`` in a daemon thread; the thread, or None when it is loaded already."""
    if name in sys.modules:
        return None
    thread = threading.Thread(target=importlib.import_module, args=(name,), name=f"preload-{name}", daemon=True)
    thread.start()
    return thread
