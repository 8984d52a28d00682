"""Regenerate the README's output excerpts from the demo ledger.

    python -m tools.readme_excerpts [LEDGER]            # rewrite README.md's excerpts
    python -m tools.readme_excerpts --check [LEDGER]    # exit 1 if any excerpt is out of date

LEDGER defaults to a fresh demo built in a temporary folder (``backsight demo``). Each excerpt
sits in README.md between ``<!-- excerpt NAME … -->`` and ``<!-- /excerpt -->`` as a console
block: the command, run on the finished demo ledger, and its output, cut the way the shown
command says. ``tests/demo/test_readme_excerpts.py`` fails when they differ.
"""

from __future__ import annotations

import re
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path

README = Path(__file__).resolve().parent.parent / "README.md"

#: How the excerpts name the ledger (the one ``backsight demo`` writes); nothing is recorded in it
#: after 2026-11-02, so every later as-of gives the same output.
SHOWN_LEDGER = "backsight-demo/demo.duckdb"


#: name -> (arguments after ``backsight``, what the shown shell pipe does, that pipe in Python)
EXCERPTS: dict[str, tuple[list[str], str, Callable[[str], str]]] = {
    "scores": (["scores", "--by", "model", "--horizon", "1"], "", lambda out: out),
    "compare": (["compare", "incumbent-hw", "challenger-damped", "--horizon", "1", "--format", "csv"], "",
                lambda out: out),
    "standings": (["standings", "--horizon", "1"], "", lambda out: out),
}

_BLOCK = re.compile(r"(<!-- excerpt (\w+)[^>]*-->\n)(.*?)(<!-- /excerpt -->)", re.DOTALL)


def run(ledger: Path, args: list[str]) -> str:
    """stdout of ``backsight --ledger LEDGER ARGS`` (in this process)."""
    from typer.testing import CliRunner

    from ledger.cli import app

    result = CliRunner().invoke(app, ["--ledger", str(ledger), *args])
    if result.exit_code != 0:
        raise RuntimeError(f"backsight {' '.join(args)} failed: {result.output}")
    return result.stdout


def excerpt(ledger: Path, name: str) -> str:
    """The console block of one excerpt."""
    args, pipe, cut = EXCERPTS[name]
    return f"```console\n$ backsight --ledger {SHOWN_LEDGER} {' '.join(args)}{pipe}\n{cut(run(ledger, args))}```\n"


def regenerate(text: str, ledger: Path) -> str:
    """``text`` (the README) with every excerpt block rewritten from ``ledger``."""
    def block(m: re.Match) -> str:
        return m.group(1) + excerpt(ledger, m.group(2)) + m.group(4)
    return _BLOCK.sub(block, text)


def blocks(text: str) -> dict[str, str]:
    """{name: console block} of the excerpts in ``text``."""
    return {m.group(2): m.group(3) for m in _BLOCK.finditer(text)}


_FLOAT = re.compile(r"-?\d+\.\d+(?:[eE][-+]?\d+)?")


def same(a: str, b: str, rel: float = 1e-9) -> bool:
    """Equal text, numbers with a decimal point equal to ``rel``: DuckDB's parallel sums can
    differ from run to run in the last digits of a full-precision CSV."""
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
        ledger = Path(paths[0]) if paths else _demo_ledger(Path(tmp))
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
