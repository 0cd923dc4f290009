"""Checks shared by the command line's options, run while the command line is parsed."""

from __future__ import annotations

from pathlib import Path

import typer


def named_file(ctx: typer.Context, param: typer.CallbackParam, value: Path | None) -> Path | None:
    """Refuse a file name that is another option (``report x.xlsx --html --pdf out.pdf`` would take ``--pdf`` as
    the HTML file's name and write the report there): the option's value was most likely forgotten."""
    if value is not None and str(value).startswith("-"):
        option = max(param.opts, key=len)
        raise typer.BadParameter(
            f"{value} looks like an option, not a file name: give the file name after {option} (a file really named "
            f"so: ./{value}).",
            ctx=ctx,
            param=param,
        )
    return value
