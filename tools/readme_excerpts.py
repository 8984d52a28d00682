"""Regenerate the README's output excerpts from the demo ledger.

    python -m tools.readme_excerpts [LEDGER]            # rewrite README.md's excerpts
    python -m tools.readme_excerpts --check [LEDGER]    # exit 1 if any excerpt is out of date

LEDGER defaults to a fresh demo built in a temporary folder (``backsight demo``). Each excerpt
sits in README.md between ``<!-- excerpt NAME … -->`` and ``<!-- /excerpt -->`` as a console
block: the commands, run in this process, and their output, cut the way each shown command
says (``| head -3``). ``tests/demo/test_readme_excerpts.py`` fails when one differs.

Every excerpt runs in a folder of its own, in a terminal of :data:`WIDTH` columns, on one of:

- ``demo``: the finished demo ledger, read only, shown as ``--ledger backsight-demo/demo.duckdb``;
- ``copy``: a copy of it, for commands that write (attributes, events, exports), shown the same way;
- ``fresh``: a new ledger, the default ``backsight.duckdb`` (the commands show no ``--ledger``).

The folder holds ``demo_history`` (a link to the repository's) and the small invented input
files an excerpt names (:data:`FILES`), which this script writes, so that error examples and
attribute or event files are real runs too.
"""

from __future__ import annotations

import contextlib
import dataclasses
import os
import re
import shutil
import subprocess
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Literal

ROOT = Path(__file__).resolve().parent.parent
README = ROOT / "README.md"

#: How the excerpts name the ledger (the one ``backsight demo`` writes); nothing is recorded in it
#: after 2026-11-02, so every later as-of gives the same output.
SHOWN_LEDGER = "backsight-demo/demo.duckdb"
#: The terminal width the excerpts are printed at (tables fit it).
WIDTH = 120
#: JVM options for a command run in a process of its own (the Spark excerpt): the tests' Spark
#: session uses the same (tests/spark/conftest.py).
JVM_OPTIONS = "-XX:TieredStopAtLevel=1 -XX:+UseSerialGC"


def _identity(out: str) -> str:
    return out


def head(n: int) -> tuple[str, Callable[[str], str]]:
    return f" | head -{n}", lambda out: "".join(out.splitlines(keepends=True)[:n])


def tail(n: int) -> tuple[str, Callable[[str], str]]:
    return f" | tail -{n}", lambda out: "".join(out.splitlines(keepends=True)[-n:])


def chars(n: int) -> tuple[str, Callable[[str], str]]:
    """``2>&1 | cut -c1-N``: an error line cut to N characters."""
    return f" 2>&1 | cut -c1-{n}", lambda out: "".join(line[:n] + "\n" for line in out.splitlines())


def fields(n: int) -> tuple[str, Callable[[str], str]]:
    """``cut -d, -f1-N`` (the outputs cut so hold no quoted commas in those fields)."""
    return f" | cut -d, -f1-{n}", lambda out: "".join(",".join(line.split(",")[:n]) + "\n" for line in out.splitlines())


@dataclasses.dataclass(frozen=True)
class Step:
    """One command of an excerpt: its arguments after ``backsight [--ledger …]``, the pipe it
    shows and that pipe in Python, and whether it is meant to fail (its Error lines are shown)."""

    args: tuple[str, ...]
    pipe: tuple[str, Callable[[str], str]] = ("", _identity)
    fails: bool = False
    comment: str = ""
    own_process: bool = False      # run as ``python -m ledger`` in a process of its own, stdout only


@dataclasses.dataclass(frozen=True)
class Excerpt:
    steps: tuple[Step, ...]
    ledger: Literal["demo", "copy", "fresh"] = "demo"


def _s(*args: str, pipe=("", _identity), fails: bool = False, comment: str = "", own_process: bool = False) -> Step:
    return Step(tuple(args), pipe, fails, comment, own_process)


#: Invented input files (file name -> text) that the excerpts read.
FILES = {
    # a run whose second row holds a word where a number belongs
    "run.csv": "series,period,forecast\nnorth/hoses,2026-11,612\nnorth/seed,2026-11,ten\n",
    # six distinct faults, one per data row after the first
    "six.csv": ("series,period,forecast,lower_80,upper_80\n"
                "north/hoses,2026-01,610,500,700\n"
                "north/seed,2026-13,420,300,500\n"
                ",2026-02,300,250,350\n"
                "north/soil,2026-02,ten,250,350\n"
                "north/tools,2026-02,12.5,13,12\n"
                "north/hoses,2026-01,615,505,705\n"
                "north/planters,2025-10,80,70,90\n"),
    # invented attributes of the demo's 18 series: region and family from the key, a unit price
    "attributes.csv": "series,region,family,unit_price\n" + "".join(
        f"{r}/{f},{r},{f},{p}\n" for r in ("north", "coast", "inland")
        for f, p in (("hoses", 24.5), ("seed", 3.2), ("soil", 8.9), ("tools", 31.0), ("planters", 14.75),
                     ("pump-spares", 57.0))),
    # two invented events: a depot closed for stock-taking (excluded), a promotion (kept)
    "events.csv": ("series,first,last,label,exclude\n"
                   "region=coast,2024-02,2024-02,stock-taking: depot closed,yes\n"
                   "north/seed,2025-04,2025-05,spring promotion,no\n"),
}

COMPARE = ("compare", "incumbent-hw", "challenger-damped")

#: name -> the excerpt README.md shows under that name.
EXCERPTS: dict[str, Excerpt] = {
    "record": Excerpt((
        _s("actuals", "demo_history/actuals/history-to-2022-12.csv"),
        _s("snapshot", "demo_history/runs/incumbent-hw/2022-12.csv", "--model", "incumbent-hw", "--origin", "2022-12"),
        _s("snapshot", "demo_history/runs/incumbent-hw/2022-12.csv", "--model", "incumbent-hw", "--origin", "2022-12"),
        _s("actuals", "demo_history/actuals/2023-01.csv"),
    ), ledger="fresh"),
    "scores": Excerpt((_s("scores", "--by", "model", "--horizon", "1"),)),
    "unknown-series": Excerpt((_s("scores", "--series", "north/hose", pipe=chars(110), fails=True),)),
    "flags-drift": Excerpt((_s("flags", "--kind", "drift", "--model", "incumbent-hw", pipe=head(6)),)),
    "flags-data": Excerpt((_s("flags", "--kind", "data", "--long", pipe=tail(2)),)),
    "flags-value": Excerpt((_s("flags", "--kind", "value", "--format", "csv", pipe=fields(8)),)),
    "compare": Excerpt((_s(*COMPARE, "--horizon", "1", "--format", "csv"),)),
    "advise": Excerpt((_s("advise", "--incumbent", "incumbent-hw", pipe=head(11)),)),
    "standings": Excerpt((_s("standings", "--horizon", "1"),)),
    "standings-periods": Excerpt((
        _s("standings", "--horizon", "1", "--periods", "--format", "csv", pipe=tail(2)),
        _s(*COMPARE, "--series", "coast/hoses", "--since", "2025-07", "--horizon", "1"),
    )),
    "backtest": Excerpt((
        _s("backtest", "demo_history/actuals/history-to-2022-12.csv", "--methods", "naive,snaive,theta",
           "--horizon", "6", "--origins", "2021-12:2022-06"),
        _s("scores", "--by", "model", "--format", "csv", pipe=fields(9)),
    ), ledger="fresh"),
    "attributes": Excerpt((_s("attributes", "attributes.csv"),), ledger="copy"),
    "totals": Excerpt((
        _s("attributes", "attributes.csv"),
        _s("scores", "--totals", "region", "--by", "model,horizon", "--model", "incumbent-hw", "--horizon", "1",
           "--horizon", "2"),
    ), ledger="copy"),
    "adjusts": Excerpt((_s("adjusts"),)),
    "verify": Excerpt((
        _s("verify"),
        _s("export", "exported/", "--format", "csv"),
    ), ledger="copy"),
    "lake": Excerpt((
        _s("export", "lake", "--partition"),
        _s("export", "lake", "--partition", comment="later: only what is new"),
        _s("scores", "--lake", "lake", "--by", "model", comment="DuckDB over the lake"),
        # Spark in a process of its own (a JVM, its log on stderr), so the test session's own
        # Spark session keeps its settings
        _s("scores", "--engine", "spark", "--lake", "lake", "--by", "model", pipe=(" 2>/dev/null", _identity),
           comment="Spark local[2] over the lake", own_process=True),
    ), ledger="copy"),
    "events": Excerpt((_s("events", "events.csv"),), ledger="copy"),
    "stability": Excerpt((_s("stability", "--by", "model", "--format", "csv"),)),
    "bad-file": Excerpt((_s("snapshot", "run.csv", "--model", "m", "--origin", "2026-10", fails=True),), ledger="fresh"),
    "six-problems": Excerpt((_s("snapshot", "six.csv", "--model", "m", "--origin", "2025-12", fails=True),),
                            ledger="fresh"),
}

_BLOCK = re.compile(r"(<!-- excerpt ([\w-]+)[^>]*-->\n)(.*?)(<!-- /excerpt -->)", re.DOTALL)


def run(args: list[str], *, fails: bool = False) -> str:
    """What ``backsight ARGS`` prints (in this process, in the current folder), stdout and stderr
    in the order written, as a terminal shows them; ``fails``: exit code 1 is expected."""
    from typer.testing import CliRunner

    from ledger.cli import app

    result = CliRunner().invoke(app, args, env={"COLUMNS": str(WIDTH), "BACKSIGHT_LEDGER": None})
    if (result.exit_code != 0) != fails or (fails and result.exit_code != 1):
        raise RuntimeError(f"backsight {' '.join(args)} gave exit code {result.exit_code}: {result.output}"
                           f"{result.exception!r}")
    return result.output


def run_process(args: list[str]) -> str:
    """What ``backsight ARGS`` prints on stdout when run in a new process (in the current folder)."""
    env = {**os.environ, "COLUMNS": str(WIDTH)}
    env.pop("BACKSIGHT_LEDGER", None)
    # The one such step starts Spark: a JVM that lives for one call spends most of it in the JIT's
    # optimising compiler (the whole lake excerpt took 74 s with it and 29 s without, on 2 cores at load average 4 to 8).
    # Compiler tier and collector change no result, so the output stays what a user's run prints.
    env["JAVA_TOOL_OPTIONS"] = " ".join(filter(None, [env.get("JAVA_TOOL_OPTIONS"), JVM_OPTIONS]))
    done = subprocess.run([sys.executable, "-m", "ledger", *args], capture_output=True, text=True, env=env)
    if done.returncode != 0:
        raise RuntimeError(f"backsight {' '.join(args)} gave exit code {done.returncode}: {done.stderr[-2000:]}")
    return done.stdout


@contextlib.contextmanager
def _folder(demo: Path, kind: str):
    """A working folder for one excerpt, with demo_history, the invented files and the ledger."""
    with tempfile.TemporaryDirectory(prefix="excerpt-") as tmp:
        work = Path(tmp)
        (work / "demo_history").symlink_to(ROOT / "demo_history", target_is_directory=True)
        for name, text in FILES.items():
            (work / name).write_text(text, encoding="utf-8")
        if kind != "fresh":
            (work / "backsight-demo").mkdir()
            target = work / SHOWN_LEDGER
            if kind == "copy":
                shutil.copyfile(demo, target)
            else:
                target.symlink_to(Path(demo).resolve())
        with contextlib.chdir(work):
            yield


def excerpt(ledger: Path, name: str) -> str:
    """The console block of one excerpt, run on the demo ledger at ``ledger``."""
    spec = EXCERPTS[name]
    lines = ["```console\n"]
    with _folder(ledger, spec.ledger):
        for step in spec.steps:
            prefix = [] if spec.ledger == "fresh" else ["--ledger", SHOWN_LEDGER]
            shown, cut = step.pipe
            note = f"      # {step.comment}" if step.comment else ""
            lines.append(f"$ backsight {' '.join([*prefix, *step.args])}{shown}{note}\n")
            args = [*prefix, *step.args]
            lines.append(cut(run_process(args) if step.own_process else run(args, fails=step.fails)))
    return "".join(lines) + "```\n"


def regenerate(text: str, ledger: Path) -> str:
    """``text`` (the README) with every excerpt block rewritten from ``ledger``."""
    def block(m: re.Match) -> str:
        return m.group(1) + excerpt(ledger, m.group(2)) + m.group(4)
    return _BLOCK.sub(block, text)


def blocks(text: str) -> dict[str, str]:
    """{name: console block} of the excerpts in ``text``."""
    return {m.group(2): m.group(3) for m in _BLOCK.finditer(text)}


_FLOAT = re.compile(r"-?\d+\.\d+(?:[eE][-+]?\d+)?")


def same(a: str, b: str, rel: float = 1e-6) -> bool:
    """Equal text, numbers with a decimal point equal to ``rel``: the reference methods are fitted
    by numerical optimisation, whose result agrees from one machine to another only to its
    tolerance (the theta backtest's MAPE moved by 1.1e-9 relative from one of our machines to
    another), so full-precision CSV digits past that are not the excerpt's content."""
    if _FLOAT.sub("#", a) != _FLOAT.sub("#", b):
        return False
    return all(abs(float(x) - float(y)) <= rel * max(abs(float(x)), abs(float(y)), 1e-300)
               for x, y in zip(_FLOAT.findall(a), _FLOAT.findall(b)))


def _demo_ledger(folder: Path) -> Path:
    from reports.demo import build_demo

    return build_demo(folder).replay.ledger_path


def main(argv: list[str]) -> int:
    check = "--check" in argv
    paths = [a for a in argv if a != "--check"]
    with tempfile.TemporaryDirectory() as tmp:
        ledger = Path(paths[0]).resolve() if paths else _demo_ledger(Path(tmp))
        old = README.read_text(encoding="utf-8")
        new = regenerate(old, ledger)
    if check:
        if blocks(new).keys() != blocks(old).keys() or not all(same(blocks(new)[k], blocks(old)[k]) for k in blocks(old)):
            print("README.md excerpts are out of date: run python -m tools.readme_excerpts", file=sys.stderr)
            return 1
        return 0
    README.write_text(new, encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
