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

import dataclasses
import gc
import shutil
import tempfile
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
    from leakbudget.workbook.apply import PlannedChanges, PlannedCopy

__all__ = [
    "AppliedCopy",
    "CheckJob",
    "ReportJob",
    "ReviewJob",
    "SplitJob",
    "check",
    "read_project",
    "report",
    "review",
    "split",
]


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

    def document_chunks(self) -> Iterator[str]:
        """The text of :meth:`document` as ``json.dumps(..., indent=2, ensure_ascii=False)`` gives it, a piece at a
        time, without building the loads' records all at once (what ``check --json`` prints)."""
        from leakbudget.output.check import json_chunks

        return json_chunks(self.result, _with_written({}, self.written))

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
    path: str | Path,
    *,
    write: bool = False,
    out: str | Path | None = None,
    progress: Progress | None = None,
    force: bool = False,
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
        project = _read_for_writing(path, out, writing, progress, force)
        if progress is not None:
            progress("Estimating", 0, 1)
        result = check_project(project)
        sheets = result_sheets(result) if writing else []
        if progress is not None:
            progress("Estimating", 1, 1)
        written = write_sheets(path, sheets, _out_path(path, out), progress, force) if writing else None
    return CheckJob(result, written)


def write_sheets(
    path: Path,
    sheets: Sequence[SheetData],
    out: Path | None,
    progress: Progress | None = None,
    force: bool = False,
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

        return write_ods(path, sheets, out, progress, force)
    from leakbudget.xlsx.package import write_sheets as write_xlsx

    return write_xlsx(path, sheets, out, progress, force)


def _read_for_writing(
    path: Path, out: str | Path | None, write: bool, progress: Progress | None = None, force: bool = False
) -> Project:
    """Read the workbook; when results are to be written, first (before any work) refuse a destination that a
    spreadsheet program holds open (beside a symbolic link and beside its target), that is read-only or has other
    names (hard links), or an existing ``out`` without ``force``. A source open there is read as last saved, and a
    warning says so."""
    from leakbudget.xlsx.files import lock_file, refuse_existing_out, refuse_if_open, refuse_if_unsafe_target

    if write:
        destination = _out_path(path, out)
        if destination is None:
            refuse_if_open(path)
            target = path.resolve() if path.is_symlink() else path
            refuse_if_open(target)
            if target.exists():
                refuse_if_unsafe_target(target)
        else:
            refuse_if_open(destination)
            refuse_existing_out(destination, force)
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
    path: str | Path,
    code: str | None = None,
    *,
    write: bool = False,
    out: str | Path | None = None,
    force: bool = False,
) -> ReviewJob:
    """Check a workbook and review it against ``code`` (nec-2020, nec-2023, iec-60364, bs-7671; default: the Code
    setting, else by supply frequency). Writes the ``Review findings`` sheet only when ``write`` is True or into
    ``out``."""
    from leakbudget.compliance.rules import review as review_project
    from leakbudget.output.review import findings_sheet

    path = Path(path)
    writing = _writes(write, out)
    rv = review_project(_read_for_writing(path, out, writing, force=force), code)
    written = write_sheets(path, [findings_sheet(rv)], _out_path(path, out), force=force) if writing else None
    return ReviewJob(rv, written)


@dataclass
class SplitJob:
    """What :func:`split` gives: the plan (with the checks before and after it), where its sheet was written, and
    the planned copy once :meth:`apply` (or ``split(..., apply_to=…)``) wrote one."""

    plan: SplitPlan
    written: WriteResult | None
    applied: AppliedCopy | None = None

    @property
    def feasible(self) -> bool:
        """The plan meets every limit (the command's exit code 0)."""
        return self.plan.feasible

    @cached_property
    def _document(self) -> dict[str, Any]:
        from leakbudget.output.split import to_json

        return _with_written(to_json(self.plan), self.written)

    def document(self) -> dict[str, Any]:
        """The document ``leakbudget split --json`` prints (with ``--apply``, an ``applied`` object too)."""
        if self.applied is None:
            return self._document
        from leakbudget.output.split import applied_dict

        a = self.applied
        return {**self._document, "applied": applied_dict(self.plan, a.cells, a.check.result, a.check.written)}

    def apply(self, out: str | Path, progress: Progress | None = None, force: bool = False) -> AppliedCopy:
        """Write the plan into a copy of the workbook at ``out`` and check that copy (see :func:`apply_plan`)."""
        self.applied = apply_plan(self.plan, out, progress, force)
        return self.applied

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
    apply_to: str | Path | None = None,
    force: bool = False,
) -> SplitJob:
    """Plan the fewest changes that bring every protected circuit within its budget and current limit
    (:func:`leakbudget.planner.split.plan_split`). Writes the ``Split plan`` sheet only when ``write`` is True or
    into ``out``; the workbook's own sheets are never changed.

    With ``apply_to`` (a new file, not with ``write`` or ``out``) the plan is written into a copy there and that
    copy is checked (:func:`apply_plan`); ``path`` is only read. ``progress`` (see :mod:`leakbudget.progress`)
    hears of reading, each planning stage and the rows written.
    """
    from leakbudget.output.split import split_sheet
    from leakbudget.planner.plan import SplitOptions
    from leakbudget.planner.split import plan_split

    path = Path(path)
    writing = _writes(write, out)
    if apply_to is not None:
        if writing:
            raise WriteBackError(
                f"{path.name}: a plan applied to a new copy writes nothing into the workbook; leave write and out "
                "unset with apply_to."
            )
        refuse_apply_target(path, Path(apply_to))
    with bulk_work():
        # with apply_to, a copy open in a spreadsheet program is refused before the work
        project = _read_for_writing(path, apply_to or out, writing or apply_to is not None, progress, force)
        plan = plan_split(project, options or SplitOptions(), progress)
        written = write_sheets(path, [split_sheet(plan)], _out_path(path, out), progress, force) if writing else None
    job = SplitJob(plan, written)
    if apply_to is not None:
        job.apply(apply_to, progress, force)
    return job


STAGE_APPLY = "Writing the planned copy"


@dataclass
class AppliedCopy:
    """What :meth:`SplitJob.apply` gives: the planned copy, the cells written into it, and the check of the copy
    (its result sheets written into it)."""

    path: Path
    source: Path  # the workbook the plan was made from; never changed
    cells: PlannedCopy
    check: CheckJob

    @property
    def all_ok(self) -> bool:
        """The copy passes ``check`` (every protected circuit and shared device within budget, none marginal)."""
        return self.check.all_ok


def refuse_apply_target(source: Path, out: Path) -> None:
    """A planned copy goes into a new file of the same kind as ``source``, never into ``source`` itself."""
    if source.suffix.lower() == ".ods":
        raise WriteBackError(
            f"{source.name}: --apply writes the plan into .xlsx workbooks only; save a copy as .xlsx in your "
            "spreadsheet program and apply the plan to that, or move the loads in the .ods yourself."
        )
    from leakbudget.xlsx.files import same_file

    suggestion = f"{source.stem}-planned{source.suffix}"
    if same_file(out, source) or out.resolve() == source.resolve():
        raise WriteBackError(
            f"{out.name}: this is the workbook the plan is made from, and a plan is applied only to a new copy "
            f"(the workbook itself is never changed); give the copy another name, e.g. {suggestion}."
        )
    if not out.parent.is_dir():
        raise WriteBackError(
            f"{out.parent}: there is no such folder for the planned copy {out.name}; create it or choose another "
            "folder."
        )
    if out.suffix.lower() != source.suffix.lower():
        raise WriteBackError(
            f"{out.name}: the planned copy is a workbook of the same kind as {source.name}, so its name must end in "
            f"{source.suffix}; name it e.g. {suggestion}."
        )


def apply_plan(plan: SplitPlan, out: str | Path, progress: Progress | None = None, force: bool = False) -> AppliedCopy:
    """Write ``plan`` into a copy of the workbook it was made from, at ``out``, then check the copy.

    The copy is the workbook with each moved or placed load's ``Circuit`` cell changed, every new circuit appended
    to Circuits (its Note marks it proposed), and the circuits the board plan moves given their new ``Protected
    by`` (and ``Device``, for an RCBO of their own) (:mod:`leakbudget.workbook.apply`); every other cell, sheet
    and part stays byte for byte. The copy is read back, compared with the plan, checked, and the ``Split plan``
    and check result sheets are written into it; the source is only read. A plan that does not meet every limit
    is applied as far as it goes (the check of the copy shows what is left).

    Raises :class:`WriteBackError` when ``out`` is the source, of another kind or open in a spreadsheet program,
    and :class:`WorkbookError` when a cell to change is merged or holds a formula; nothing is written then.
    """
    from leakbudget.output.check import result_sheets
    from leakbudget.output.split import split_sheet
    from leakbudget.workbook.apply import write_planned_copy
    from leakbudget.xlsx.files import refuse_existing_out, refuse_if_open
    from leakbudget.xlsx.package import write_sheets

    source, out = plan.before.project.path, Path(out)
    refuse_apply_target(source, out)
    refuse_if_open(out)
    refuse_existing_out(out, force)
    with tempfile.TemporaryDirectory(prefix="leakbudget-apply-") as folder:
        staged = Path(folder) / out.name  # the same name, so every message about the copy names it as the user will
        if progress is not None:
            progress(STAGE_APPLY, 0, 1)
        cells = write_planned_copy(source, planned_changes(plan), staged)
        if progress is not None:
            progress(STAGE_APPLY, 1, 1)
        with bulk_work():
            project = dataclasses.replace(read_project(staged, progress), path=out)
            _verify_copy(plan.after.project, project)
            result = check_project(project)
            sheets = [split_sheet(plan, applied_from=source.name), *result_sheets(result)]
            written = write_sheets(staged, sheets, out, progress, force=True)  # an existing out was refused above
    return AppliedCopy(out, source, dataclasses.replace(cells, path=out), CheckJob(result, written))


def planned_changes(plan: SplitPlan) -> PlannedChanges:
    """The plan as plain data for :mod:`leakbudget.workbook.apply`: each moved or placed load's sheet row and
    circuit, the new circuits as planned (after the board plan), and the existing circuits the board plan moves."""
    from leakbudget.workbook.apply import CircuitUpdate, PlannedChanges

    after = {c.circuit_id: c for c in plan.after.project.circuits}
    new_ids = [n.circuit.circuit_id for n in plan.new_circuits]
    updates = []
    for move in plan.board.moves if plan.board is not None else []:
        if move.moved and move.circuit not in new_ids:
            c = after[move.circuit]
            own = move.own_device is not None
            updates.append(
                CircuitUpdate(c.circuit_id, c.protected_by, c.device.key if own else None, c.rcd_type if own else None)
            )
    return PlannedChanges(
        {a.load.row: a.to_id for a in plan.assignments if a.moved or a.placed},
        [after[cid] for cid in new_ids],
        updates,
    )


def _verify_copy(planned: Project, copy: Project) -> None:
    """The copy must read back as the planned project: every load on its planned circuit, every circuit as planned
    (a mismatch is a bug in the writer, not in the user's file)."""

    def rooms(c: Any) -> tuple[str, ...]:  # as a comma-separated cell reads back
        return tuple(r.strip().lower() for r in ", ".join(c.rooms).split(",") if r.strip())

    def key(c: Any) -> tuple[Any, ...]:
        length = None if c.cable_length_m is None else round(c.cable_length_m, 6)
        return (
            *(c.device.key, c.rcd_type, round(c.voltage_v, 9), round(c.frequency_hz, 9), c.system, c.rating_a),
            *(length, c.cable_key, rooms(c), c.shared_neutral, c.note, c.protected_by, c.phase, c.purpose),
            c.neutral_earth_bond,
        )

    problems = [
        f"'{a.name}' (row {a.row}) reads {b.circuit_id} instead of {a.circuit_id}"
        for a, b in zip(planned.loads, copy.loads)
        if a.circuit_id != b.circuit_id
    ]
    if len(planned.loads) != len(copy.loads):
        problems.append(f"{len(copy.loads)} loads read instead of {len(planned.loads)}")
    read = {c.circuit_id: c for c in copy.circuits}
    problems += [
        f"circuit {c.circuit_id} reads {key(read[c.circuit_id]) if c.circuit_id in read else 'as missing'} "
        f"instead of {key(c)}"
        for c in planned.circuits
        if c.circuit_id not in read or key(read[c.circuit_id]) != key(c)
    ]
    if problems:
        raise RuntimeError("the planned copy does not read back as the plan (a bug): " + "; ".join(problems[:5]))


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
    all_circuits: bool = False,
) -> ReportJob:
    """Check and review a workbook (writing nothing into it), plan a split when ``split`` options are given, and
    write the hand-over report as HTML and/or PDF (at least one).

    ``code`` is the wiring code the review uses (as for :func:`review`); ``generated`` the report's date;
    ``all_circuits`` gives every circuit and shared device a detail section (else only those not ok)."""
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
        all_circuits=all_circuits,
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
