"""Where things sit in ``content.xml``: the tables, the automatic styles, and which tables leakbudget wrote.

An .ods keeps every table in ``content.xml`` (ODF 1.2 Part 1 §9.1.2 ``<table:table>``, children of
``<office:spreadsheet>``, in ``<office:body>``) and the styles its cells use as automatic styles
(``<office:automatic-styles>``, §3.15.3), which a spreadsheet program renames when it saves. The writer splices
bytes at the offsets found here, so every byte it does not mean to change stays as the program wrote it.

The part is first checked with defusedxml (no DTD before the root element, the only place XML allows one, so no
entity can be declared); then expat, which the check has made safe, reports each element's byte offset. Names are
matched as written (``table:table``), as python-calamine matches them; the root must bind the usual prefixes.

A table leakbudget wrote is recognised by its first cell's note (``<office:annotation>``, §14.1) written by
``leakbudget`` and starting with :data:`MARKER_START`: LibreOffice keeps a cell's note, its author and its text
when it saves, while it drops attributes and elements it does not know. The writer also takes as its own a table
with a result sheet's name whose first row is exactly that sheet's header and which holds no formula: a result
sheet leakbudget wrote into an .xlsx that LibreOffice then saved as .ods (the .xlsx writer adds no note). Any
other table is the user's and is never replaced.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field
from xml.parsers import expat

import defusedxml
import defusedxml.ElementTree as DET

from leakbudget.ods.scan import check_utf8
from leakbudget.xlsx.xml_text import BadXmlError, UnsafeXmlError

MARKER_CREATOR = "leakbudget"
MARKER_START = "Written by leakbudget"
_START_TAG = re.compile(rb'<[^\s/>]+(?:\s+[^\s=/>]+\s*=\s*(?:"[^"]*"|\'[^\']*\'))*\s*(/?)>')


@dataclass
class Element:
    """Where one element sits in the part's bytes."""

    name: str  # qualified name as written
    start: int  # offset of its "<"
    start_end: int  # just after its start tag's ">"
    end: int  # just after its end tag (== start_end for an empty-element tag)
    empty: bool
    attrs: dict[str, str] = field(default_factory=dict)
    close: int = -1  # offset of its end tag's "<" (-1 for an empty-element tag)


@dataclass
class Table:
    element: Element
    name: str
    ours: bool = False  # its first cell carries leakbudget's note
    header: list[str] = field(default_factory=list)  # the texts of its first row (trailing empty cells dropped)
    formulas: bool = False  # some cell holds a formula


@dataclass
class Layout:
    """The elements of ``content.xml`` the writer needs, with their offsets."""

    namespaces: dict[str, str]  # prefix -> URI declared on the root element
    root: Element
    automatic_styles: Element | None
    body: Element | None
    spreadsheet: Element | None
    tables: list[Table]
    styles: list[Element]  # children of <office:automatic-styles> (style:name in attrs)


def root_namespaces(data: bytes) -> dict[str, str]:
    """The namespace declarations on the root element; refuses a DTD (defusedxml) and a part not in UTF-8, reads
    no further."""
    check_utf8(data[:512])
    declared: dict[str, str] = {}
    try:
        for event, item in DET.iterparse(_Bytes(data), events=("start-ns", "start"), forbid_dtd=True):
            if event == "start":
                break
            prefix, uri = item  # start-ns gives (prefix, uri)
            declared.setdefault(prefix, uri)
    except defusedxml.DefusedXmlException as exc:
        raise UnsafeXmlError(type(exc).__name__) from None
    except ET.ParseError as exc:
        raise BadXmlError(str(exc)) from None
    return declared


class _Bytes:
    """A read-only stream over bytes without copying them (iterparse reads in 16 KiB pieces and stops early)."""

    def __init__(self, data: bytes) -> None:
        self.view, self.position = memoryview(data), 0

    def read(self, size: int = -1) -> bytes:
        end = len(self.view) if size < 0 else self.position + size
        piece = bytes(self.view[self.position : end])
        self.position += len(piece)
        return piece


def layout(data: bytes) -> Layout:
    """Find the root, the automatic styles, the body, the spreadsheet and its tables in ``data`` (a content.xml).

    Raises :class:`UnsafeXmlError` for a DTD and :class:`BadXmlError` when the part is not well-formed.
    """
    namespaces = root_namespaces(data)
    parser = expat.ParserCreate()
    stack: list[Element] = []
    found: dict[str, Element] = {}
    tables: list[Table] = []
    styles: list[Element] = []
    first_row = _FirstRow()

    def refuse(*_args: object) -> None:
        raise UnsafeXmlError("DTDForbidden")

    deep = 0  # open elements below the ones recorded (inside a table, a style, ...)

    def start(name: str, attrs: dict[str, str]) -> None:
        nonlocal deep
        if deep:
            deep += 1
            if first_row.active:
                first_row.start(name, attrs)
                parser.CharacterDataHandler = first_row.characters if first_row.collecting else None
            return
        depth = len(stack)
        begin = parser.CurrentByteIndex
        match = _START_TAG.match(data, begin)
        if match is None:  # expat accepted it, so only a bug in _START_TAG gets here
            raise BadXmlError(f"cannot locate the start tag of <{name}>")
        element = Element(name, begin, match.end(), match.end(), bool(match.group(1)), dict(attrs))
        parent = stack[-1].name if stack else None
        if depth == 0:
            found["root"] = element
        elif depth == 1 and name in ("office:automatic-styles", "office:body"):
            found.setdefault(name, element)
        elif depth == 2 and parent == "office:automatic-styles":
            styles.append(element)
        elif depth == 2 and parent == "office:body" and name == "office:spreadsheet":
            found.setdefault(name, element)
        elif depth == 3 and parent == "office:spreadsheet" and name == "table:table":
            tables.append(Table(element, attrs.get("table:name", "")))
            first_row.begin()
        stack.append(element)
        if depth == 3 or (depth == 2 and name != "office:spreadsheet"):
            deep = 1  # what is inside a table or a style is not recorded

    def end(name: str) -> None:
        nonlocal deep
        if deep > 1:
            deep -= 1
            if first_row.active:
                first_row.end(name)
                parser.CharacterDataHandler = first_row.characters if first_row.collecting else None
            return
        deep = 0
        element = stack.pop()
        if not element.empty:
            element.close = parser.CurrentByteIndex
            element.end = data.index(b">", element.close) + 1
        if element.name == "table:table" and len(stack) == 3:
            first_row.finish(tables[-1], data)

    parser.StartElementHandler = start
    parser.EndElementHandler = end
    parser.StartDoctypeDeclHandler = refuse  # root_namespaces refused a DTD already; never expand one here
    parser.EntityDeclHandler = refuse
    try:
        parser.Parse(data, True)
    except expat.ExpatError as exc:
        raise BadXmlError(str(exc)) from exc
    if "root" not in found:
        raise BadXmlError("no root element")
    return Layout(
        namespaces,
        found["root"],
        found.get("office:automatic-styles"),
        found.get("office:body"),
        found.get("office:spreadsheet"),
        tables,
        styles,
    )


class _FirstRow:
    """Follows a table: the texts of its first row's cells, whether its first cell carries leakbudget's note, and
    whether any of its cells holds a formula."""

    def __init__(self) -> None:
        self.active = False
        self.collecting = False  # inside a first-row cell's paragraph (or a note's author or paragraph)

    def begin(self) -> None:
        self.active, self.state, self.depth = True, "row", 0
        self.cells: list[str] = []
        self.creator: list[str] = []
        self.note: list[str] = []
        self.text: list[str] = []
        self.where = ""  # "creator", "note" or "cell": what character data goes to
        self.first_cell, self.note_paragraphs, self.repeats = True, 0, 1
        self.in_note = False

    def start(self, name: str, attrs: dict[str, str]) -> None:
        if self.state == "row" and name == "table:table-row":
            self.state = "cells"
        elif self.state == "cells" and name in ("table:table-cell", "table:covered-table-cell"):
            self.state, self.depth, self.text, self.paragraphs, self.where = "cell", 0, [], 0, ""
            self.repeats = min(_count(attrs.get("table:number-columns-repeated")), 1024)
        elif self.state == "cell":
            self.depth += 1
            if name == "office:annotation":
                self.in_note = True
            elif self.in_note and self.first_cell and name == "dc:creator":
                self.where = "creator"
            elif self.in_note and self.first_cell and name == "text:p":
                self.note_paragraphs += 1
                self.where = "note" if self.note_paragraphs == 1 else ""
            elif not self.in_note and name == "text:p":
                self.paragraphs += 1
                if self.paragraphs > 1:
                    self.text.append("\n")
                self.where = "cell"
            elif not self.in_note and name == "text:s":
                self.text.append(" " * min(_count(attrs.get("text:c")), 1024))
        self.collecting = self.state == "cell" and bool(self.where)

    def characters(self, data: str) -> None:
        target = {"creator": self.creator, "note": self.note, "cell": self.text}.get(self.where)
        if target is not None:
            target.append(data)

    def end(self, name: str) -> None:
        if self.state == "cells" and name == "table:table-row":
            self.state = "done"
            self.active = False  # the rest of the table is not looked at
        elif self.state == "cell":
            if self.depth == 0:  # the cell ends
                self.cells += ["".join(self.text)] * self.repeats
                self.state, self.first_cell = "cells", False
            else:
                self.depth -= 1
                if name == "office:annotation":
                    self.in_note = False
                if name in ("dc:creator", "text:p"):
                    self.where = ""
        self.collecting = self.state == "cell" and bool(self.where)

    def finish(self, table: Table, data: bytes) -> None:
        self.active = False
        while self.cells and not self.cells[-1]:
            self.cells.pop()
        table.header = self.cells
        table.ours = "".join(self.creator).strip() == MARKER_CREATOR and "".join(self.note).startswith(MARKER_START)
        # the attribute's name anywhere in the table (text holding it too: then the table counts as the user's)
        table.formulas = data.find(b"table:formula", table.element.start, table.element.end) >= 0


def _count(text: str | None) -> int:
    return int(text) if text is not None and text.isascii() and text.isdigit() else 1
