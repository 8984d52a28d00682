"""The README's output excerpts are what the finished demo ledger prints (tools/readme_excerpts.py)."""

from __future__ import annotations

import re

import pytest

from tools.readme_excerpts import EXCERPTS, README, blocks, excerpt, same

SHOWN = blocks(README.read_text(encoding="utf-8"))


def test_every_excerpt_is_in_the_readme_once():
    text = README.read_text(encoding="utf-8")
    assert sorted(SHOWN) == sorted(EXCERPTS)
    assert all(text.count(f"<!-- excerpt {name}:") == 1 for name in EXCERPTS)


_CONSOLE = re.compile(r"(<!-- excerpt [\w-]+[^>]*-->\n)?```console\n(.*?)```\n", re.DOTALL)


def unmarked_outputs(text: str) -> list[str]:
    """The first lines of console blocks that show output (a line that is neither a `$ ` command
    nor its indented continuation) but are no excerpt and not followed by "(Illustrative"."""
    loose = []
    for m in _CONSOLE.finditer(text):
        lines = m.group(2).splitlines()
        following = text[m.end():].lstrip("\n").split("\n\n", 1)[0]
        if (m.group(1) is None and any(not line.startswith(("$ ", "    ")) for line in lines)
                and not following.startswith("(Illustrative")):
            loose.append(lines[0])
    return loose


def test_every_shown_output_is_an_excerpt_or_marked_illustrative():
    assert unmarked_outputs(README.read_text(encoding="utf-8")) == []
    block = "```console\n$ backsight verify\nledger: sound\n```\n"                 # the check can fail
    assert unmarked_outputs(block) == ["$ backsight verify"]
    assert unmarked_outputs(block + "\n(Illustrative: invented.)\n") == []
    assert unmarked_outputs("<!-- excerpt verify: … -->\n" + block) == []


@pytest.mark.parametrize("name", sorted(EXCERPTS))
def test_readme_excerpt_matches_the_demo_ledger(demo_site, name):
    _, result = demo_site            # built once per session (tests/conftest.py)
    fresh = excerpt(result.replay.ledger_path, name)
    assert same(SHOWN[name], fresh), (f"README excerpt {name!r} differs from the demo ledger's output; "
                                      f"run python -m tools.readme_excerpts and review the diff:\n{fresh}")


def test_the_comparison_can_fail():
    assert same("a,1.0000000000001\n", "a,1.0000000000002\n")
    assert not same("a,1.01\n", "a,1.02\n") and not same("a,1.0\n", "b,1.0\n")
    assert not same("a,12.695708\n", "a,12.695738\n")             # 2.4e-6 relative: a real change
