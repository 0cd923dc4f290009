"""Result sheets as OpenDocument tables: ``<table:table>`` elements and the automatic styles they use.

Each sheet (a :class:`leakbudget.xlsx.package.SheetData`, the same the .xlsx writer gets) becomes one table
(ODF 1.2 Part 1 §9.1.2): a column element per column (§9.1.6) with its width and number format as the column's
default cell style (``table:default-cell-style-name``), a bold header row whose first cell carries leakbudget's note
(:data:`leakbudget.ods.content.MARKER_START`, how the next run recognises the table), then one row per data row.
The chart and the frozen header row of the .xlsx sheet are not written: a chart is a separate embedded document
in an .ods, and the frozen row lives in ``settings.xml``, which holds the user's view of every sheet.

Cells (§19.385 ``office:value-type``): text as ``string`` with its paragraphs; numbers as ``float`` (``percentage``
in a column formatted as a percentage) with ``office:value`` and, as the shown text, the value in its format;
booleans as ``boolean``; None and NaN as empty cells. As in the .xlsx writer, ±inf and numbers beyond
:data:`leakbudget.xlsx.rows.EXCEL_MAX_NUMBER` are written as text (``inf``, ``1.5e+308``). Text is always text,
never a formula. Spaces, tabs and line breaks are written as ODF requires (§6.1.2 white space is collapsed, so runs
of spaces, leading and trailing ones become ``<text:s>``, tabs ``<text:tab/>``, each line its own ``<text:p>``);
characters XML 1.0 cannot hold (control characters but tab and line feed, carriage return included, lone
surrogates, U+FFFE/U+FFFF) become U+FFFD.
"""

from __future__ import annotations

import html
import math
import numbers
import re
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from functools import partial

from leakbudget.ods.content import MARKER_CREATOR, MARKER_START
from leakbudget.xlsx.package import SheetData
from leakbudget.xlsx.rows import EXCEL_MAX_NUMBER, ROWS_PER_CHUNK
from leakbudget.xlsx.xml_text import quoteattr

OUR_STYLE_PREFIX = "leakbudget-"  # automatic styles we add are named leakbudget-<kind><n>
MARKER_TEXT = (
    MARKER_START + ": this sheet is replaced each time leakbudget writes its results; keep your own work on other "
    "sheets."
)
# Namespaces our elements use (ODF 1.2 Part 1 §1.5; fo: XSL-FO compatible, dc: Dublin Core), by usual prefix.
NAMESPACES = {
    "office": "urn:oasis:names:tc:opendocument:xmlns:office:1.0",
    "style": "urn:oasis:names:tc:opendocument:xmlns:style:1.0",
    "text": "urn:oasis:names:tc:opendocument:xmlns:text:1.0",
    "table": "urn:oasis:names:tc:opendocument:xmlns:table:1.0",
    "fo": "urn:oasis:names:tc:opendocument:xmlns:xsl-fo-compatible:1.0",
    "number": "urn:oasis:names:tc:opendocument:xmlns:datastyle:1.0",
    "dc": "http://purl.org/dc/elements/1.1/",
}
# A column width in characters as a spreadsheet program means it: characters of the default font's widest digit,
# 7 px each at 96 px per inch, plus 5 px of padding (modelling choice: XlsxWriter's conversion, so both formats
# get the same widths).
PX_PER_CHARACTER = 7
PADDING_PX = 5
PX_PER_INCH = 96

Value = str | float | int | bool | None
RowProgress = Callable[[int, int], None]

_NUMBER_CODE = re.compile(r"^(#,##)?0(?:\.(0+))?(%?)$")
_NOT_XML = re.compile("[\x00-\x08\x0b-\x1f\ud800-\udfff\ufffe\uffff]")
_SPACES = re.compile(" +")


@dataclass(frozen=True)
class NumberFormat:
    """One of the number format codes the result sheets use (``0``, ``0.000``, ``#,##0.00``, ``0.0%``)."""

    code: str
    decimals: int
    grouping: bool
    percent: bool

    def shown(self, value: float) -> str:
        """``value`` as a spreadsheet program shows it in this format."""
        number = value * 100 if self.percent else value
        text = f"{number:,.{self.decimals}f}" if self.grouping else f"{number:.{self.decimals}f}"
        return text + ("%" if self.percent else "")

    def style(self, name: str) -> str:
        """The data style (ODF 1.2 Part 1 §16.27.2 ``number:number-style``, §16.27.9 ``number:percentage-style``)."""
        grouping = ' number:grouping="true"' if self.grouping else ""
        number = (
            f'<number:number number:decimal-places="{self.decimals}" number:min-decimal-places="{self.decimals}" '
            f'number:min-integer-digits="1"{grouping}/>'
        )
        if self.percent:
            return (
                f'<number:percentage-style style:name="{name}">{number}<number:text>%</number:text>'
                "</number:percentage-style>"
            )
        return f'<number:number-style style:name="{name}">{number}</number:number-style>'


def number_format(code: str) -> NumberFormat | None:
    """The :class:`NumberFormat` of an Excel format code, or None for a code this writer does not translate (its
    column is then written in the spreadsheet's default format)."""
    match = _NUMBER_CODE.match(code)
    if match is None:
        return None
    return NumberFormat(code, len(match.group(2) or ""), bool(match.group(1)), bool(match.group(3)))


def width_inches(characters: float) -> float:
    """A column ``characters`` wide [in], as XlsxWriter sizes it: int(7 w + 0.5) + 5 px at 96 px/in."""
    pixels = int(characters * PX_PER_CHARACTER + 0.5) + PADDING_PX if characters >= 1 else int(characters * 12 + 0.5)
    return pixels / PX_PER_INCH


class Styles:
    """The automatic styles the new tables use, named so that none collides with a name in ``taken``."""

    def __init__(self, sheets: Sequence[SheetData], taken: set[str]) -> None:
        self.taken = set(taken)
        self.names: list[str] = []  # every style name added, in order
        self.fragments: list[str] = []
        self.header = self._add("ce", partial(_cell_style, bold=True))
        self.plain = self._add("ce", _cell_style)  # booleans in a formatted column
        self.formats: dict[str, tuple[NumberFormat, str]] = {}  # code -> (format, cell style name)
        self.widths: dict[float, str] = {}
        for sheet in sheets:
            for code in sheet.number_formats.values():
                fmt = number_format(code)
                if fmt is not None and code not in self.formats:
                    data_style = self._add("N", fmt.style)
                    self.formats[code] = (fmt, self._add("ce", partial(_cell_style, data=data_style)))
            for width in sheet.column_widths.values():
                if width not in self.widths:
                    self.widths[width] = self._add("co", partial(_column_style, characters=width))

    def _add(self, kind: str, make: Callable[[str], str]) -> str:
        n = 1
        while (name := f"{OUR_STYLE_PREFIX}{kind}{n}") in self.taken:
            n += 1
        self.taken.add(name)
        self.names.append(name)
        self.fragments.append(make(name))
        return name

    def xml(self, declarations: str = "") -> bytes:
        """The styles as children of ``<office:automatic-styles>``; ``declarations`` go on each element."""
        if declarations:
            return "".join(_declare(f, declarations) for f in self.fragments).encode()
        return "".join(self.fragments).encode()


def _cell_style(name: str, bold: bool = False, data: str | None = None) -> str:
    """A table-cell style (ODF 1.2 Part 1 §16.2), bold or with a data style (§19.493 style:data-style-name)."""
    data_attr = f' style:data-style-name="{data}"' if data else ""
    text = (
        '<style:text-properties fo:font-weight="bold" style:font-weight-asian="bold" style:font-weight-complex="bold"/>'
        if bold
        else ""
    )
    if not text:
        return f'<style:style style:name="{name}" style:family="table-cell"{data_attr}/>'
    return f'<style:style style:name="{name}" style:family="table-cell"{data_attr}>{text}</style:style>'


def _column_style(name: str, characters: float) -> str:
    """A table-column style with a width (ODF 1.2 Part 1 §17.16 style:table-column-properties)."""
    return (
        f'<style:style style:name="{name}" style:family="table-column"><style:table-column-properties '
        f'style:column-width="{width_inches(characters):.4f}in"/></style:style>'
    )


def _declare(fragment: str, declarations: str) -> str:
    """Put namespace ``declarations`` on the first start tag of ``fragment``."""
    end = fragment.index(" ")
    return fragment[:end] + declarations + fragment[end:]


# --------------------------------------------------------------------------------------------- the tables


def paragraphs(text: str) -> str:
    """``text`` as the ``<text:p>`` elements of a cell (see the module docstring)."""
    text = _NOT_XML.sub("\ufffd", text)
    return "".join(f"<text:p>{_line(line)}</text:p>" for line in text.split("\n"))


def _line(line: str) -> str:
    escaped = html.escape(line, quote=False)

    def spaces(match: re.Match[str]) -> str:
        run = len(match.group())
        before = escaped[match.start() - 1] if match.start() else ""
        after = escaped[match.end()] if match.end() < len(escaped) else ""
        if run == 1 and before not in ("", "\t") and after not in ("", "\t"):
            return " "
        return "<text:s/>" if run == 1 else f'<text:s text:c="{run}"/>'

    return _SPACES.sub(spaces, escaped).replace("\t", "<text:tab/>")


class TableWriter:
    """Writes one sheet's ``<table:table>`` in pieces of :data:`ROWS_PER_CHUNK` rows."""

    def __init__(self, sheet: SheetData, styles: Styles, declarations: str = "") -> None:
        self.sheet, self.styles, self.declarations = sheet, styles, declarations
        self.width = max(
            [len(sheet.header), *(len(row) for row in sheet.rows)]
            + [c + 1 for c in sheet.number_formats]
            + [c + 1 for c in sheet.column_widths]
        )
        self.formats: dict[int, NumberFormat] = {}
        self.column_styles: list[str] = []
        for column in range(self.width):
            attrs = ""
            width = sheet.column_widths.get(column)
            if width is not None:
                attrs += f' table:style-name="{styles.widths[width]}"'
            code = sheet.number_formats.get(column)
            if code is not None and code in styles.formats:
                fmt, cell_style = styles.formats[code]
                self.formats[column] = fmt
                attrs += f' table:default-cell-style-name="{cell_style}"'
            self.column_styles.append(f"<table:table-column{attrs}/>")

    def chunks(self, progress: RowProgress | None = None) -> Iterator[bytes]:
        sheet = self.sheet
        head = [f"<table:table{self.declarations} table:name={quoteattr(sheet.name)}>", *self.column_styles]
        head.append("<table:table-row>")
        header = [str(title) for title in sheet.header] or [""]
        for column, title in enumerate(header):
            note = ""
            if column == 0:
                note = (
                    f"<office:annotation><dc:creator>{MARKER_CREATOR}</dc:creator>"
                    f"<text:p>{html.escape(MARKER_TEXT, quote=False)}</text:p></office:annotation>"
                )
            head.append(
                f'<table:table-cell table:style-name="{self.styles.header}" office:value-type="string">'
                f"{note}{paragraphs(title)}</table:table-cell>"
            )
        head.append("</table:table-row>")
        yield "".join(head).encode()
        total = len(sheet.rows)
        pieces: list[str] = []
        texts: dict[str, str] = {}  # text -> its cell; result rows repeat the same texts many times
        for number, row in enumerate(sheet.rows, start=1):
            cells = [self._cell(column, value, texts) for column, value in enumerate(row)]
            while cells and cells[-1] == "<table:table-cell/>":
                cells.pop()
            pieces.append(f"<table:table-row>{''.join(cells) or '<table:table-cell/>'}</table:table-row>")
            if number % ROWS_PER_CHUNK == 0:
                yield "".join(pieces).encode()
                pieces.clear()
                if progress is not None:
                    progress(number, total)
        pieces.append("</table:table>")
        yield "".join(pieces).encode()
        if progress is not None:
            progress(total, total)

    def _cell(self, column: int, value: Value, texts: dict[str, str]) -> str:
        if type(value) is str:
            cell = texts.get(value)
            if cell is None:
                cell = texts[value] = _text_cell(value)
            return cell
        if isinstance(value, bool):
            style = f' table:style-name="{self.styles.plain}"' if column in self.formats else ""
            word = "true" if value else "false"
            return (
                f'<table:table-cell{style} office:value-type="boolean" office:boolean-value="{word}">'
                f"<text:p>{word.upper()}</text:p></table:table-cell>"
            )
        if isinstance(value, numbers.Real):
            number = float(value)
            if math.isnan(number):
                return "<table:table-cell/>"
            if abs(number) > EXCEL_MAX_NUMBER:
                return _text_cell(repr(number))
            written = str(int(value)) if isinstance(value, numbers.Integral) else repr(number)
            fmt = self.formats.get(column)
            kind = "percentage" if fmt is not None and fmt.percent else "float"
            shown = fmt.shown(number) if fmt is not None else written
            return (
                f'<table:table-cell office:value-type="{kind}" office:value="{written}">'
                f"<text:p>{shown}</text:p></table:table-cell>"
            )
        if value is None:
            return "<table:table-cell/>"
        return _text_cell(str(value))


def _text_cell(text: str) -> str:
    return f'<table:table-cell office:value-type="string">{paragraphs(text)}</table:table-cell>'


def declarations(namespaces: Mapping[str, str]) -> str:
    """Namespace declarations our elements need that the root element does not make (empty for LibreOffice's)."""
    return "".join(
        f" xmlns:{prefix}={quoteattr(uri)}" for prefix, uri in NAMESPACES.items() if namespaces.get(prefix) != uri
    )
