"""The README's promises: the job paragraph, exactly two fresh-machine commands, CI runs one."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _bash_blocks(text: str) -> list[str]:
    return [b.strip() for b in re.findall(r"```bash\n(.*?)```", text, flags=re.S)]


def test_readme_opens_with_the_job_then_two_commands():
    text = (ROOT / "README.md").read_text()
    head = text.split("```", 1)[0]
    assert "gwdeficit" in head and "research estimate" in head.lower()
    blocks = _bash_blocks(text)
    assert len(blocks) >= 2
    assert "gwdeficit demo" in blocks[0]
    assert "pytest" in blocks[1]


def test_ci_runs_the_readme_test_command_verbatim():
    test_cmd = _bash_blocks((ROOT / "README.md").read_text())[1]
    ci = (ROOT / ".ci" / "run").read_text()
    assert test_cmd in ci.splitlines()
