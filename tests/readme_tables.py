"""The README's workbook-format tables, made from the schema and the settings (one source for both).

``python -m tests.readme_tables`` rewrites them in README.md; tests/test_cli.py checks they are up to date.
"""

from __future__ import annotations

import re
from pathlib import Path

from leakbudget.input.schema import SETTINGS, SHEETS
from leakbudget.settings import SETTING_SPECS

README = Path(__file__).resolve().parents[1] / "README.md"
START = "**Circuits** (required):"
END = "\n## What happens to your workbook"


def _default(spec) -> str:  # noqa: ANN001
    if spec.name in ("Voltage", "Frequency"):
        return "by device"
    return "blank" if spec.default is None else str(spec.default)


def tables() -> str:
    """The tables of every sheet, with the settings after the Settings sheet."""
    out: list[str] = []
    for sheet in SHEETS:
        out.append(f"**{sheet.name}** ({'required' if sheet.required else 'optional'}): {sheet.help}\n")
        out.append("| column | bare numbers in | meaning |\n|---|---|---|")
        for c in sheet.columns:
            name = f"`{c.name}`" + (" (required)" if c.required else "")
            out.append(f"| {name} | {c.unit or ''} | {c.help} |")
        out.append("")
        if sheet is SETTINGS:
            out.append(
                "The settings (names as in the `Setting` column; each result says where every value came from):\n"
            )
            out.append("| setting | default | meaning |\n|---|---|---|")
            out.extend(f"| `{s.name}` | {_default(s)} | {s.help} |" for s in SETTING_SPECS)
            out.append("")
    return "\n".join(out)


def current() -> str:
    text = README.read_text(encoding="utf-8")
    return text[text.index(START) : text.index(END)].strip()


def rewrite() -> None:
    text = README.read_text(encoding="utf-8")
    start, end = text.index(START), text.index(END)
    README.write_text(text[:start] + tables().strip() + "\n" + text[end:], encoding="utf-8")


if __name__ == "__main__":
    rewrite()
    print(re.sub(r"\s+", " ", "README tables rewritten."))
