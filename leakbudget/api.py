"""The front door: one function per command, read → run → write, each returning a job you can inspect.

``import leakbudget`` gives these as ``leakbudget.check``, ``leakbudget.split``, ``leakbudget.review``,
``leakbudget.report`` and ``leakbudget.read_project``. Each reads the workbook and computes; it writes the result
sheets only when asked (``write=True`` writes into the workbook itself, ``out=`` into a new copy), as the command
line does by default. A job's ``document()`` is the JSON document the command's ``--json`` prints, and its
``*_frame()`` methods give the same records as pandas DataFrames whose columns are that document's keys.

Pure library code (no typer, no rich): the CLI calls exactly these and renders what they return. pandas is
imported only when a frame is asked for.

Every figure is a planning estimate: measure, follow the local code in force and licensed practice, test every
device after installation, and never remove or up-rate protection to cure nuisance trips (``leakbudget.CAUTION``).
"""

from __future__ import annotations

import gc
import shutil
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import date
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any

from leakbudget.checking import CheckResult
from leakbudget.checking import check as check_project
from leakbudget.errors import WorkbookError, WriteBackError
from leakbudget.model import Project
from leakbudget.progress import Progress
from leakbudget.workbook.read import read_project
from leakbudget.xlsx.package import SheetData, WriteResult

if TYPE_CHECKING:
    import pandas as pd

    from leakbudget.compliance.rules import Review
    from leakbudget.planner.plan import SplitOptions, SplitPlan
    from leakbudget.reporting.document import Report

__all__ = ["CheckJob", "ReportJob", "ReviewJob", "SplitJob", "check", "read_project", "report", "review", "split"]


def _frame(records: Sequence[dict[str, Any]]) -> pd.DataFrame:
    """Records of a JSON document as a DataFrame: one row each, one column per key, in the document's order."""
    import pandas as pd

    return pd.DataFrame.from_records(list(records))


def _with_written(doc: dict[str, Any], written: WriteResult | None) -> dict[str, Any]:
    """Add where the results were written (and the backup kept) to a command's JSON document."""
    doc["written_to"] = str(written.path) if written else None
    doc["backup"] = str(written.backup) if written and written.backup else None
    return doc


@dataclass
class CheckJob:
    """What :func:`check` gives: the check result, and where its sheets were written (None: not written)."""

    result: CheckResult
    written: WriteResult | None

    @property
    def all_ok(self) -> bool:
        """Every protected circuit within its budget (the command's exit code 0)."""
        return self.result.all_ok

    @cached_property
    def _document(self) -> dict[str, Any]:
        from leakbudget.output.check import to_json

        return _with_written(to_json(self.result), self.written)

    def document(self) -> dict[str, Any]:
        """The document ``leakbudget check --json`` prints."""
        return self._document

    def circuits_frame(self) -> pd.DataFrame:
        """One row per circuit: the ``circuits`` records of :meth:`document`."""
        return _frame(self._document["circuits"])

    def loads_frame(self) -> pd.DataFrame:
        """One row per load and cable run: the ``loads`` records of :meth:`document`."""
        return _frame(self._document["loads"])


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


def _writes(write: bool, out: str | Path | None) -> bool:
    return write or out is not None


def check(
    path: str | Path, *, write: bool = False, out: str | Path | None = None, progress: Progress | None = None
) -> CheckJob:
    """Check a workbook: estimate every load, judge every circuit, the trip likelihood and any readings.

    Writes nothing unless ``write`` is True (the ``Circuit results`` and ``Load results`` sheets go into the
    workbook, the previous version kept as a backup) or ``out`` names a new file to write them into (the workbook
    is left untouched). ``progress`` (see :mod:`leakbudget.progress`) hears of reading, estimating and the rows
    written.
    """
    from leakbudget.output.check import result_sheets

    path = Path(path)
    writing = _writes(write, out)
    with bulk_work():
        project = _read_for_writing(path, out, writing, progress)
        if progress is not None:
            progress("Estimating", 0, 1)
        result = check_project(project)
        sheets = result_sheets(result) if writing else []
        if progress is not None:
            progress("Estimating", 1, 1)
        written = write_sheets(path, sheets, _out_path(path, out), progress) if writing else None
    return CheckJob(result, written)


def write_sheets(
    path: Path, sheets: Sequence[SheetData], out: Path | None, progress: Progress | None = None
) -> WriteResult:
    """Write result sheets with the writer of the workbook's kind: :func:`leakbudget.ods.package.write_ods` for
    an .ods, :func:`leakbudget.xlsx.package.write_sheets` otherwise."""
    ods = path.suffix.lower() == ".ods"
    if out is not None and (out.suffix.lower() == ".ods") != ods:
        raise WriteBackError(
            f"{out}: the results of {path.name} are written in its own format; give --out a name ending in "
            f"{path.suffix.lower()}."
        )
    if ods:
        from leakbudget.ods.package import write_ods

        return write_ods(path, sheets, out, progress)
    from leakbudget.xlsx.package import write_sheets as write_xlsx

    return write_xlsx(path, sheets, out, progress)


def _read_for_writing(path: Path, out: str | Path | None, write: bool, progress: Progress | None = None) -> Project:
    """Read the workbook; when results are to be written, first (before any work) refuse a destination that a
    spreadsheet program holds open. A source open there is read as last saved, and a warning says so."""
    from leakbudget.xlsx.files import lock_file, refuse_if_open

    if write:
        destination = _out_path(path, out)
        refuse_if_open(destination if destination is not None else path.resolve() if path.is_symlink() else path)
    project = read_project(path, progress)
    lock = lock_file(path)
    if lock is not None:
        project.warnings.append(
            f"{path.name} is open in a spreadsheet program (lock file {lock}); changes not saved there were not checked"
        )
    return project


def _out_path(path: Path, out: str | Path | None) -> Path | None:
    """Where to write: None (into ``path`` itself) when ``out`` is absent or names the same file."""
    if out is None or Path(out).resolve() == path.resolve():
        return None
    return Path(out)


@dataclass
class ReviewJob:
    """What :func:`review` gives: the review (with the check it reviewed) and where its sheet was written."""

    review: Review
    written: WriteResult | None

    @cached_property
    def _document(self) -> dict[str, Any]:
        from leakbudget.output.review import to_json

        return _with_written(to_json(self.review), self.written)

    def document(self) -> dict[str, Any]:
        """The document ``leakbudget review --json`` prints."""
        return self._document

    def findings_frame(self) -> pd.DataFrame:
        """One row per finding, errors first: the ``findings`` records of :meth:`document`."""
        return _frame(self._document["findings"])


def review(
    path: str | Path, code: str | None = None, *, write: bool = False, out: str | Path | None = None
) -> ReviewJob:
    """Check a workbook and review it against ``code`` (nec-2020, nec-2023, iec-60364, bs-7671; default: the Code
    setting, else by supply frequency). Writes the ``Review findings`` sheet only when ``write`` is True or into
    ``out``."""
    from leakbudget.compliance.rules import review as review_project
    from leakbudget.output.review import findings_sheet

    path = Path(path)
    writing = _writes(write, out)
    rv = review_project(_read_for_writing(path, out, writing), code)
    written = write_sheets(path, [findings_sheet(rv)], _out_path(path, out)) if writing else None
    return ReviewJob(rv, written)


@dataclass
class SplitJob:
    """What :func:`split` gives: the plan (with the checks before and after it) and where its sheet was written."""

    plan: SplitPlan
    written: WriteResult | None

    @property
    def feasible(self) -> bool:
        """The plan meets every limit (the command's exit code 0)."""
        return self.plan.feasible

    @cached_property
    def _document(self) -> dict[str, Any]:
        from leakbudget.output.split import to_json

        return _with_written(to_json(self.plan), self.written)

    def document(self) -> dict[str, Any]:
        """The document ``leakbudget split --json`` prints."""
        return self._document

    def assignments_frame(self) -> pd.DataFrame:
        """One row per load: where it is and where the plan puts it (the ``assignments`` records)."""
        return _frame(self._document["assignments"])

    def circuits_frame(self) -> pd.DataFrame:
        """One row per circuit after the plan, with its figures before (the ``circuits`` records)."""
        return _frame(self._document["circuits"])


def split(
    path: str | Path,
    options: SplitOptions | None = None,
    *,
    write: bool = False,
    out: str | Path | None = None,
    progress: Progress | None = None,
) -> SplitJob:
    """Plan the fewest changes that bring every protected circuit within its budget and current limit
    (:func:`leakbudget.planner.split.plan_split`). Writes the ``Split plan`` sheet only when ``write`` is True or
    into ``out``; the Loads sheet itself is never changed.

    ``progress`` (see :mod:`leakbudget.progress`) hears of reading, each planning stage and the rows written.
    """
    from leakbudget.output.split import split_sheet
    from leakbudget.planner.plan import SplitOptions
    from leakbudget.planner.split import plan_split

    path = Path(path)
    writing = _writes(write, out)
    with bulk_work():
        plan = plan_split(_read_for_writing(path, out, writing, progress), options or SplitOptions(), progress)
        written = write_sheets(path, [split_sheet(plan)], _out_path(path, out), progress) if writing else None
    return SplitJob(plan, written)


@dataclass
class ReportJob:
    """What :func:`report` gives: the review it ran, the report's content, the files written, and any plan."""

    review: Review
    report: Report
    written: list[Path]
    plan: SplitPlan | None = None


def report(
    path: str | Path,
    html: str | Path | None = None,
    pdf: str | Path | None = None,
    code: str | None = None,
    split: SplitOptions | None = None,
    generated: date | None = None,
) -> ReportJob:
    """Check and review a workbook (writing nothing into it), plan a split when ``split`` options are given, and
    write the hand-over report as HTML and/or PDF (at least one).

    ``code`` is the wiring code the review uses (as for :func:`review`); ``generated`` the report's date."""
    from leakbudget.compliance.rules import review as review_project
    from leakbudget.reporting.content import build_report
    from leakbudget.reporting.write import check_outputs, write_report

    path = Path(path)
    html = Path(html) if html is not None else None
    pdf = Path(pdf) if pdf is not None else None
    check_outputs(path, html, pdf)
    project = read_project(path)
    rv = review_project(project, code)
    plan = None
    if split is not None:
        from leakbudget.planner.split import plan_split

        plan = plan_split(project, split)
    content = build_report(
        rv.check,
        findings=rv.findings,
        generated=generated,
        review_basis=f"{rv.label} ({rv.code_source})",
        plan=_plan_document(plan),
    )
    written = write_report(content, path, html, pdf)
    return ReportJob(rv, content, written, plan)


def _plan_document(plan: SplitPlan | None) -> dict[str, Any] | None:
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
        raise WorkbookError(
            "a file of this name is already here; the demo will not overwrite it",
            path=dest,
            hint="run the demo in another folder, or move the file away",
        )
    shutil.copyfile(src, dest)
    return dest
