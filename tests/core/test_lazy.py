"""The lazy stand-ins for pandas and pyarrow (ledger/lazy.py) and the start-up they buy.

Each check runs in a fresh interpreter: this test process has long since imported pandas.
"""

from __future__ import annotations

import subprocess
import sys
import textwrap


def _run(code: str) -> str:
    done = subprocess.run([sys.executable, "-c", textwrap.dedent(code)], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    return done.stdout.strip()


def test_importing_the_cli_loads_neither_pandas_nor_pyarrow():
    out = _run("""
        import sys
        import ledger.cli
        assert "ledger.api" in sys.modules and "duckdb" in sys.modules   # the import did load the CLI
        print(sorted(m for m in ("pandas", "pyarrow") if m in sys.modules))
        """)
    assert out == "[]"


def test_stand_in_imports_on_first_lookup_and_keeps_the_attribute():
    out = _run("""
        import sys
        from ledger.lazy import pandas as pd
        before = "pandas" in sys.modules
        frame = pd.DataFrame({"a": [1, 2]})
        import pandas
        print(before, "pandas" in sys.modules, pd.DataFrame is pandas.DataFrame,
              "DataFrame" in vars(pd), int(frame["a"].sum()))
        """)
    assert out == "False True True True 3"


def test_an_unknown_attribute_raises_as_on_the_module():
    out = _run("""
        from ledger.lazy import pandas as pd
        try:
            pd.no_such_name
        except AttributeError as exc:
            print("pandas" in str(exc))
        """)
    assert out == "True"


def test_preload_imports_in_a_thread_once():
    out = _run("""
        import sys
        from ledger.lazy import preload
        thread = preload("pandas")
        thread.join(60)
        print(thread.name, not thread.is_alive(), "pandas" in sys.modules, preload("pandas"))
        """)
    assert out == "preload-pandas True True None"


def test_a_pickled_stand_in_arrives_as_the_module():
    # Spark's workers receive the grouped functions by cloudpickle, with the modules they use
    out = _run("""
        import pickle
        from pyspark import cloudpickle   # the pickler Spark sends them with
        from ledger.lazy import pandas as pd
        def count(frame):
            return pd.DataFrame({"n": [len(frame)]})
        again = pickle.loads(cloudpickle.dumps(count))
        import pandas
        print(pickle.loads(pickle.dumps(pd)) is pandas, int(again([1, 2, 3])["n"].iloc[0]))
        """)
    assert out == "True 3"
