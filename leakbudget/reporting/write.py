"""Writing the report's files: HTML and/or PDF, each checked by name before any work and never half-written."""

from __future__ import annotations

import os
import stat
from pathlib import Path
from typing import IO

from leakbudget.errors import ReportError
from leakbudget.reporting.document import Report
from leakbudget.xlsx.files import replace_atomically

OUTPUT_SUFFIXES = {"html": (".html", ".htm"), "pdf": (".pdf",)}


def _check_output(path: Path, fmt: str, workbook: Path) -> Path:
    path = Path(path)
    if path.suffix.lower() not in OUTPUT_SUFFIXES[fmt]:
        raise ReportError(
            f"{path}: the {fmt.upper()} report needs a name ending in "
            f"{' or '.join(OUTPUT_SUFFIXES[fmt])}; give e.g. --{fmt} report{OUTPUT_SUFFIXES[fmt][0]}."
        )
    if path.exists() and path.resolve() == workbook.resolve():
        raise ReportError(f"{path}: this is the workbook itself; give the report a new file name.")
    if not path.parent.is_dir():
        raise ReportError(f"{path}: the folder {path.parent} does not exist; create it or choose another folder.")
    return path


def check_outputs(workbook: Path, html: Path | None, pdf: Path | None) -> list[tuple[str, Path]]:
    """Validate the output names before any work: (format, path) pairs; raise ReportError naming the problem."""
    if html is None and pdf is None:
        raise ReportError(
            f"{workbook.name}: say where to write the report; give --html REPORT.html and/or --pdf REPORT.pdf."
        )
    return [(fmt, _check_output(p, fmt, workbook)) for fmt, p in (("html", html), ("pdf", pdf)) if p is not None]


def write_report(report: Report, workbook: Path, html: Path | None = None, pdf: Path | None = None) -> list[Path]:
    """Write the report as HTML and/or PDF; return the paths written. Checks both names before writing either.

    Raises :class:`leakbudget.errors.WriteBackError` naming the file when it cannot be written."""
    written = []
    for fmt, path in check_outputs(workbook, html, pdf):
        if fmt == "html":
            from leakbudget.reporting.html import render_html

            data = render_html(report).encode("utf-8")
        else:
            from leakbudget.reporting.pdf import render_pdf

            data = render_pdf(report)
        # a report replacing an earlier one keeps its permissions; a new one gets the workbook's
        mode = stat.S_IMODE(os.stat(path if path.exists() else workbook).st_mode)

        def write(handle: IO[bytes], payload: bytes = data) -> int:
            return handle.write(payload)

        replace_atomically(path, mode, write)  # never half-written
        written.append(path)
    return written
