"""The README keeps its promises: two set-up commands, the CI runs the same test command, links resolve."""

from __future__ import annotations

import re
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
README = (REPO / "README.md").read_text(encoding="utf-8")


def fenced_blocks(text: str) -> list[str]:
    return [block.strip() for block in re.findall(r"```[^\n]*\n(.*?)```", text, flags=re.S)]


def test_readme_has_exactly_two_setup_commands():
    blocks = fenced_blocks(README)
    assert len(blocks) == 2
    assert all(len(block.splitlines()) == 1 for block in blocks)
    assert blocks[0].endswith("stackdepth view --demo")
    assert "pytest" in blocks[1]


def test_ci_runs_the_readme_test_command():
    ci = (REPO / ".ci" / "run").read_text(encoding="utf-8")
    assert fenced_blocks(README)[1] in ci


def test_readme_says_research_tool_and_links_resolve():
    assert "not for clinical or diagnostic decisions" in README
    for target in re.findall(r"\]\(([^)#]+)\)", README):
        if not target.startswith("http"):
            assert (REPO / target).exists(), target


def test_docs_links_resolve():
    for page in (REPO / "docs").glob("*.md"):
        for target in re.findall(r"\]\(([^)#]+)\)", page.read_text(encoding="utf-8")):
            if not target.startswith("http"):
                assert (page.parent / target).exists(), f"{page.name}: {target}"
