"""The README's output excerpts are what the finished demo ledger prints (tools/readme_excerpts.py)."""

from __future__ import annotations

from tools.readme_excerpts import EXCERPTS, README, blocks, excerpt, same


def test_readme_excerpts_match_the_demo_ledger(demo_site):
    _, result = demo_site            # built once per session (tests/conftest.py)
    shown = blocks(README.read_text(encoding="utf-8"))
    assert set(shown) == set(EXCERPTS)
    for name in EXCERPTS:
        fresh = excerpt(result.replay.ledger_path, name)
        assert same(shown[name], fresh), (f"README excerpt {name!r} differs from the demo ledger's output; "
                                          f"run python -m tools.readme_excerpts and review the diff:\n{fresh}")


def test_the_comparison_can_fail():
    assert same("a,1.0000000000001\n", "a,1.0000000000002\n")
    assert not same("a,1.01\n", "a,1.02\n") and not same("a,1.0\n", "b,1.0\n")
