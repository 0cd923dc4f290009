"""Merge the cell formats of freshly written sheets into a user's ``xl/styles.xml`` by additive splices.

Cells in a worksheet part name their format by index (``s="3"``) into the workbook's ``cellXfs`` list, and each
``xf`` there names a number format, font, fill and border by id or index (ECMA-376 Part 1, §18.8 "Styles").
Grafted sheets come with XlsxWriter's own style sheet, so their indices mean nothing in the user's workbook. This
module appends the entries the new sheets need to the user's lists (re-using an identical existing entry, so
repeated runs do not grow the file), and maps the new sheets' ``s``/``style`` indices onto the merged list. The
user's existing entries keep their positions, so every index already used in the workbook keeps its meaning.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from dataclasses import dataclass

from leakbudget.xlsx.xml_text import Span, XmlPart, canonical, local_name, parse

MAIN_NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"

# Child order of <styleSheet> (ECMA-376 Part 1, §18.8, CT_Stylesheet); a missing list is inserted in this order.
STYLESHEET_ORDER = (
    "numFmts",
    "fonts",
    "fills",
    "borders",
    "cellStyleXfs",
    "cellXfs",
    "cellStyles",
    "dxfs",
    "tableStyles",
    "colors",
    "extLst",
)
# Number format ids below this are built in (ECMA-376 Part 1, §18.8, numFmt); custom formats take ids from here up.
FIRST_CUSTOM_NUMFMT_ID = 164

_INDEXED_LISTS = (("fonts", "fontId"), ("fills", "fillId"), ("borders", "borderId"))
_XF_ID_ATTRIBUTE = re.compile(rb'\s(numFmtId|fontId|fillId|borderId|xfId)="(\d+)"')
_TAG_NAME = re.compile(rb"<(/?)([A-Za-z])")
_CELL_STYLE = re.compile(rb'(<(?:c|row)\s[^>]*?\bs=")(\d+)(")')
_COLUMN_STYLE = re.compile(rb'(<col\s[^>]*?\bstyle=")(\d+)(")')


@dataclass(frozen=True)
class StyleMerge:
    """Result of a merge: the user's new styles bytes and the map from the new sheets' xf index to the user's."""

    styles: bytes
    xf_map: dict[int, int]
    changed: bool


def merge_styles(user: XmlPart, ours: bytes) -> StyleMerge:
    """Append to ``user`` (the workbook's styles part) what the xfs of ``ours`` (XlsxWriter's styles) need.

    The new sheets' default format (xf 0) is mapped to the user's xf 0, so unformatted cells look like the rest
    of the workbook; every other xf is appended unless an identical one (after remapping) already exists.
    """
    ours_part = XmlPart(ours)
    prefix = user.spans[0].prefix.encode()
    lists = {name: _ListEditor(user, name, prefix) for name in STYLESHEET_ORDER[:6]}

    numfmt_map = _merge_number_formats(lists["numFmts"], ours_part)
    maps: dict[str, dict[int, int]] = {"numFmtId": numfmt_map}
    for list_name, attribute in _INDEXED_LISTS:
        maps[attribute] = {
            i: lists[list_name].index_of(_fragment(ours_part, span))
            for i, span in enumerate(ours_part.find(local_name(list_name)[:-1], 2))
        }
    has_style_xfs = bool(lists["cellStyleXfs"].existing)

    def remap(match: re.Match[bytes]) -> bytes:
        attribute, value = match.group(1).decode(), int(match.group(2))
        if attribute == "xfId":
            return b' xfId="0"' if has_style_xfs else b""
        if attribute == "numFmtId" and value < FIRST_CUSTOM_NUMFMT_ID:
            return match.group(0)
        return f' {attribute}="{maps[attribute][value]}"'.encode()

    cell_xfs = ours_part.find("xf", 2, within=ours_part.find("cellXfs", 1)[0])
    xf_map = {0: 0}
    for i, span in enumerate(cell_xfs[1:], start=1):
        xf_map[i] = lists["cellXfs"].index_of(_XF_ID_ATTRIBUTE.sub(remap, _fragment(ours_part, span)))
    for editor in lists.values():
        editor.flush()
    return StyleMerge(user.result(), xf_map, user.changed)


def remap_cell_styles(sheet_xml: bytes, xf_map: dict[int, int]) -> bytes:
    """Rewrite the ``s`` (cells, rows) and ``style`` (columns) indices of an XlsxWriter worksheet part."""

    def sub(match: re.Match[bytes]) -> bytes:
        return match.group(1) + str(xf_map[int(match.group(2))]).encode() + match.group(3)

    return _COLUMN_STYLE.sub(sub, _CELL_STYLE.sub(sub, sheet_xml))


def _fragment(part: XmlPart, span: Span) -> bytes:
    return part.data[span.start : span.end]


def _merge_number_formats(editor: _ListEditor, ours: XmlPart) -> dict[int, int]:
    """Map each custom number format id of ``ours`` to the user's id for the same format code."""
    by_code = {e.get("formatCode"): int(e.get("numFmtId", "-1")) for e in editor.existing}
    used = [FIRST_CUSTOM_NUMFMT_ID - 1, *by_code.values()]
    mapping: dict[int, int] = {}
    for span in ours.find("numFmt", 2):
        code, our_id = span.attrs["formatCode"], int(span.attrs["numFmtId"])
        if code not in by_code:
            new_id = max(used) + 1
            used.append(new_id)
            by_code[code] = new_id
            fragment = re.sub(rb'numFmtId="\d+"', f'numFmtId="{new_id}"'.encode(), _fragment(ours, span))
            editor.append(fragment)
        mapping[our_id] = by_code[code]
    return mapping


class _ListEditor:
    """Appends entries to one list of the user's style sheet (``fonts``, ``cellXfs``, …) and keeps its count."""

    def __init__(self, part: XmlPart, name: str, prefix: bytes) -> None:
        self.part, self.name, self.prefix = part, name, prefix
        found = part.find(name, 1)
        self.span = found[0] if found else None
        element = part.root.find(f"{{{MAIN_NS}}}{name}")
        self.existing: list[ET.Element] = list(element) if element is not None else []
        self._canonical = [canonical(e) for e in self.existing]
        self._new: list[bytes] = []

    def index_of(self, fragment: bytes) -> int:
        """Index of an entry equal to ``fragment`` (an unprefixed XlsxWriter element), appending it if absent."""
        wrapped = parse(b'<w xmlns="' + MAIN_NS.encode() + b'">' + fragment + b"</w>")[0]
        key = canonical(wrapped)
        if key in self._canonical:
            return self._canonical.index(key)
        self.append(fragment)
        self._canonical.append(key)
        return len(self._canonical) - 1

    def append(self, fragment: bytes) -> None:
        self._new.append(_TAG_NAME.sub(rb"<\1" + self.prefix + rb"\2", fragment))

    def flush(self) -> None:
        """Splice the appended entries and the new count into the part (or insert the whole list)."""
        if not self._new:
            return
        body = b"".join(self._new)
        count = str(len(self.existing) + len(self._new))
        if self.span is not None:
            self.part.append_children(self.span, body)
            self.part.set_attribute(self.span, "count", count)
            return
        name = self.prefix + self.name.encode()
        element = b"<" + name + b' count="' + count.encode() + b'">' + body + b"</" + name + b">"
        later = STYLESHEET_ORDER[STYLESHEET_ORDER.index(self.name) + 1 :]
        following = [s for s in self.part.spans if s.depth == 1 and s.local in later]
        if following:
            self.part.insert_before(following[0], element)
        else:
            self.part.append_children(self.part.spans[0], element)
