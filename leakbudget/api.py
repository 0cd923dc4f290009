"""The jobs behind the commands: read → validate → estimate → evaluate → write, one function per command.

Pure library code (no typer, no rich); the CLI calls one of these and renders what it returns.
"""

from __future__ import annotations

import gc
import shutil
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import date
from pathlib import Path
from typing import TYPE_CHECKING

from leakbudget.errors import WorkbookError
from leakbudget.checking import CheckResult, check
from leakbudget.model import Project
from leakbudget.progress import Progress
from leakbudget.workbook.read import read_project
from leakbudget.xlsx.package import WriteResult

if TYPE_CHECKING:
    from leakbudget.planner.plan import SplitOptions, SplitPlan
    from leakbudget.compliance.rules import Review
    from leakbudget.reporting.document import Report


@dataclass
class CheckJob:
    result: CheckResult
    written: WriteResult | None


@contextmanager
def bulk_work() -> Iterator[None]:
    """Pause Python's cyclic garbage collector while a job builds its many small objects.

    A big workbook makes millions of cells, results and rows, none of them in reference cycles; each full
    collection walks all of them again, which costs a quarter to a third of a 100,000-load check. Reference
    counting still frees everything as usual; cycles made meanwhile are collected once the job is done.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def check_workbook(path: str | Path, out: str | Path | None = None, write: bool = True,
                   progress: Progress | None = None) -> CheckJob:
    """Check a workbook and (unless ``write`` is False) write the result sheets into it, or into ``out``.

    ``progress`` (see :mod:`leakbudget.progress`) hears of reading, estimating and the rows written.
    """
    from leakbudget.output.check import result_sheets
    from leakbudget.xlsx.package import write_sheets

    path = Path(path)
    with bulk_work():
        project = _read_for_writing(path, out, write, progress)
        if progress is not None:
            progress("Estimating", 0, 1)
        result = check(project)
        sheets = result_sheets(result) if write else []
        if progress is not None:
            progress("Estimating", 1, 1)
        written = write_sheets(path, sheets, _out_path(path, out), progress) if write else None
    return CheckJob(result, written)


def _read_for_writing(path: Path, out: str | Path | None, write: bool, progress: Progress | None = None
                      ) -> Project:
    """Read the workbook; when results are to be written, first (before any work) refuse a destination that a
    spreadsheet program holds open. A source open there is read as last saved, and a warning says so."""
    from leakbudget.xlsx.files import lock_file, refuse_if_open

    if write:
        destination = _out_path(path, out)
        refuse_if_open(destination if destination is not None else path.resolve() if path.is_symlink() else path)
    project = read_project(path, progress)
    lock = lock_file(path)
    if lock is not None:
        project.warnings.append(f"{path.name} is open in a spreadsheet program (lock file {lock}); changes not "
                                "saved there were not checked")
    return project


def _out_path(path: Path, out: str | Path | None) -> Path | None:
    """Where to write: None (into ``path`` itself) when ``out`` is absent or names the same file."""
    if out is None or Path(out).resolve() == path.resolve():
        return None
    return Path(out)


@dataclass
class ReviewJob:
    review: Review
    written: WriteResult | None


def review_workbook(path: str | Path, code: str | None = None, out: str | Path | None = None, write: bool = True
                    ) -> ReviewJob:
    """Check a workbook, review it against ``code`` (default: Code setting, else by supply) and (unless ``write``
    is False) write the ``Review findings`` sheet into it, or into ``out``."""
    from leakbudget.output.review import findings_sheet
    from leakbudget.compliance.rules import review
    from leakbudget.xlsx.package import write_sheets

    path = Path(path)
    rv = review(_read_for_writing(path, out, write), code)
    written = write_sheets(path, [findings_sheet(rv)], _out_path(path, out)) if write else None
    return ReviewJob(rv, written)


@dataclass
class SplitJob:
    plan: SplitPlan
    written: WriteResult | None


def split_workbook(path: str | Path, out: str | Path | None = None, write: bool = True,
                   options: SplitOptions | None = None, progress: Progress | None = None) -> SplitJob:
    """Plan a split of a workbook's loads (:func:`leakbudget.planner.split.plan_split`) and (unless ``write`` is False)
    write the ``Split plan`` sheet into it, or into ``out``. The Loads sheet itself is never changed.

    ``progress`` (see :mod:`leakbudget.progress`) hears of reading, each planning stage and the rows written.
    """
    from leakbudget.planner.plan import SplitOptions
    from leakbudget.planner.split import plan_split
    from leakbudget.output.split import split_sheet
    from leakbudget.xlsx.package import write_sheets

    path = Path(path)
    with bulk_work():
        plan = plan_split(_read_for_writing(path, out, write, progress), options or SplitOptions(), progress)
        written = write_sheets(path, [split_sheet(plan)], _out_path(path, out), progress) if write else None
    return SplitJob(plan, written)


@dataclass
class ReportJob:
    review: Review
    report: Report
    written: list[Path]
    plan: SplitPlan | None = None


def report_workbook(path: str | Path, html: str | Path | None = None, pdf: str | Path | None = None,
                    code: str | None = None, split: SplitOptions | None = None, generated: date | None = None
                    ) -> ReportJob:
    """Check and review a workbook (writing nothing into it), plan a split when ``split`` options are given, and
    write the hand-over report as HTML and/or PDF.

    ``code`` is the wiring code the review uses (as for :func:`review_workbook`)."""
    from leakbudget.reporting.content import build_report
    from leakbudget.reporting.write import check_outputs, write_report
    from leakbudget.compliance.rules import review

    path = Path(path)
    html = Path(html) if html is not None else None
    pdf = Path(pdf) if pdf is not None else None
    check_outputs(path, html, pdf)
    project = read_project(path)
    rv = review(project, code)
    plan = None
    if split is not None:
        from leakbudget.planner.split import plan_split

        plan = plan_split(project, split)
    report = build_report(rv.check, findings=rv.findings, generated=generated,
                          review_basis=f"{rv.code.label} ({rv.code_source})", plan=_plan_document(plan))
    written = write_report(report, path, html, pdf)
    return ReportJob(rv, report, written, plan)


def _plan_document(plan: SplitPlan | None) -> dict | None:
    from leakbudget.output.split import to_json

    return to_json(plan) if plan is not None else None


def example_path(name: str = "alder-quay-remodel.xlsx") -> Path:
    """The shipped example workbook (inside the wheel, or the source tree)."""
    from importlib import resources

    try:
        ref = resources.files("leakbudget.examples").joinpath(name)
        if ref.is_file():
            return Path(str(ref))
    except ModuleNotFoundError:
        pass
    return Path(__file__).resolve().parent.parent / "examples" / name


def copy_example(folder: str | Path, name: str = "alder-quay-remodel.xlsx") -> Path:
    """Copy the shipped example into ``folder`` (refusing to overwrite a file of the user's) and return it."""
    src = example_path(name)
    dest = Path(folder) / name
    if dest.exists():
        raise WorkbookError("a file of this name is already here; the demo will not overwrite it", path=dest,
                            hint="run the demo in another folder, or move the file away")
    shutil.copyfile(src, dest)
    return dest
