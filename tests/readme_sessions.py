"""Re-run the README's shell sessions on the demo workbook and write their real output back.

``python -m tests.readme_sessions`` runs, in one fresh folder, every ```console block whose commands touch only
the demo workbook (``leakbudget demo`` first), with an 80-column terminal and unbuffered output, and replaces each
command's output in README.md. Blocks about other files (a broken workbook, a portfolio) are left as they are.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import tempfile
from pathlib import Path

README = Path(__file__).resolve().parents[1] / "README.md"
BLOCK = re.compile(r"```console\n(.*?)```", re.S)
DEMOS = ("alder-quay-remodel.xlsx", "tanners-row-flat.xlsx")
ALONE = ("leakbudget demo", "leakbudget devices", "leakbudget appliances", "leakbudget cables")


def _ours(commands: list[str]) -> bool:
    return all(any(d in c for d in DEMOS) or c.startswith(ALONE) or c.startswith("echo $?") for c in commands)


def _commands(block: str) -> list[str]:
    return [line[2:] for line in block.splitlines() if line.startswith("$ ")]


def run_block(block: str, folder: Path) -> str:
    """The block with every command's output replaced by what it prints now (``echo $?`` sees the last exit)."""
    env = {**os.environ, "COLUMNS": "80", "PYTHONUNBUFFERED": "1", "TERM": "dumb"}
    env.pop("CI", None)
    out: list[str] = []
    last = 0
    for command in _commands(block):
        script = command if not command.startswith("echo $?") else f"(exit {last}); {command}"
        done = subprocess.run(["bash", "-c", script + " 2>&1"], cwd=folder, env=env, capture_output=True, text=True)
        last = done.returncode
        out.append(f"$ {command}\n{done.stdout}")
    return "".join(out)


def run_python_session(block: str, folder: Path) -> str:
    """A ``>>>`` session run line by line in ``folder`` with the demo workbook copied in, its output written as a
    Python prompt shows it (the repr of each expression)."""
    from leakbudget.api import copy_example

    copy_example(folder)
    here = Path.cwd()
    os.chdir(folder)
    names: dict[str, object] = {}
    out: list[str] = []
    try:
        for line in block.splitlines():
            if not line.startswith(">>> "):
                continue
            code = line[4:]
            out.append(line)
            try:
                value = eval(compile(code, "<readme>", "eval"), names)  # noqa: S307 (our own README)
            except SyntaxError:
                exec(compile(code, "<readme>", "exec"), names)  # noqa: S102
                continue
            if value is not None:
                out.append(repr(value))
    finally:
        os.chdir(here)
    return "\n".join(out) + "\n"


def rewrite() -> int:
    text = README.read_text(encoding="utf-8")
    folder = Path(tempfile.mkdtemp(prefix="readme-"))
    changed = 0

    def replace(match: re.Match[str]) -> str:
        nonlocal changed
        block = match.group(1)
        commands = _commands(block)
        if not commands or not _ours(commands):
            return match.group(0)
        new = run_block(block, folder)
        changed += new != block
        return f"```console\n{new}```"

    text = BLOCK.sub(replace, text)
    start = text.index("```pycon\n", text.index("## Python API")) + len("```pycon\n")
    end = text.index("```", start)
    session = run_python_session(text[start:end], Path(tempfile.mkdtemp(prefix="readme-py-")))
    changed += session != text[start:end]
    README.write_text(text[:start] + session + text[end:], encoding="utf-8")
    return changed


if __name__ == "__main__":
    print(f"{rewrite()} README session(s) changed.", file=sys.stderr)
