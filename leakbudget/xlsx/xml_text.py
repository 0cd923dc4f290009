"""Safe parsing of a package's small XML parts, and minimal byte splices into them.

A part is parsed with defusedxml (no DTD, no entity declarations, no external references) for its structure, then
edited by splicing bytes at the offsets expat reports, so every byte we do not mean to change stays as the
spreadsheet program wrote it: namespace prefixes, ``mc:Ignorable`` lists, whitespace and attribute order included.
Re-serialising with ElementTree would rename prefixes and break ``mc:Ignorable``, which Excel reports as corruption.
"""

from __future__ import annotations

import html
import re
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field
from xml.parsers import expat

import defusedxml
import defusedxml.ElementTree as DET

# The start tag of an element, from its '<' to its '>' (attribute values may hold '>' but not their own quote).
_START_TAG = re.compile(rb'<[^\s/>]+(?:\s+[^\s=/>]+\s*=\s*(?:"[^"]*"|\'[^\']*\'))*\s*(/?)>')
_ATTRIBUTE = re.compile(rb'\s+([^\s=/>]+)(\s*=\s*)("[^"]*"|\'[^\']*\')')
_ENCODING = re.compile(rb'^<\?xml[^>]*encoding\s*=\s*["\']([A-Za-z0-9._-]+)["\']')
_ATTRIBUTE_WHITESPACE = str.maketrans({"\n": "&#10;", "\r": "&#13;", "\t": "&#9;"})


def quoteattr(value: str) -> str:
    """``value`` as a double-quoted XML attribute value, escaped as xml.sax.saxutils.quoteattr escapes it (&, <,
    >, quotes, and newline, carriage return and tab as character references). html.escape does the work without
    importing saxutils, which pulls in urllib (30-40 ms of start-up)."""
    return '"' + html.escape(value, quote=True).translate(_ATTRIBUTE_WHITESPACE) + '"'


class UnsafeXmlError(Exception):
    """The part declares a DTD or entities (e.g. an entity-expansion bomb); it was not expanded."""


class BadXmlError(Exception):
    """The part is not well-formed XML, or not UTF-8 encoded."""


def parse(data: bytes) -> ET.Element:
    """Parse ``data`` with defusedxml, refusing any DTD, entity declaration or external reference."""
    try:
        return DET.fromstring(data, forbid_dtd=True, forbid_entities=True, forbid_external=True)
    except defusedxml.DefusedXmlException as exc:
        raise UnsafeXmlError(type(exc).__name__) from exc
    except ET.ParseError as exc:
        raise BadXmlError(str(exc)) from exc


def canonical(element: ET.Element) -> tuple:
    """A hashable form of ``element`` for equality: names, sorted attributes, stripped text, children in order."""
    return (
        element.tag,
        tuple(sorted(element.attrib.items())),
        (element.text or "").strip(),
        tuple(canonical(child) for child in element),
    )


def local_name(qualified: str) -> str:
    """``x:fonts`` -> ``fonts``; ``{ns}fonts`` -> ``fonts``."""
    return qualified.rsplit("}", 1)[-1].rsplit(":", 1)[-1]


@dataclass
class Span:
    """Where one element sits in the part's bytes (offsets into the original data)."""

    name: str  # qualified name as written, e.g. "sheet" or "x:sheet"
    depth: int  # 0 for the root
    start: int  # offset of the start tag's "<"
    start_end: int  # offset just after the start tag's ">"
    end: int  # offset just after the end tag's ">" (== start_end for an empty-element tag)
    empty: bool  # written as <name .../>
    attrs: dict[str, str] = field(default_factory=dict)  # attributes as written (xmlns declarations included)

    @property
    def local(self) -> str:
        return local_name(self.name)

    @property
    def prefix(self) -> str:
        """The element's prefix with its colon ("x:"), or "" for the default namespace."""
        return self.name[: -len(self.local)]


class XmlPart:
    """One XML part: its parsed tree, the spans of its shallow elements, and pending byte splices."""

    def __init__(self, data: bytes, max_depth: int = 2) -> None:
        self.data = data
        self.root = parse(data)  # refuses DTDs and entities before expat below ever sees the bytes
        match = _ENCODING.match(data.lstrip(b"\xef\xbb\xbf"))
        if data[:2] in (b"\xff\xfe", b"\xfe\xff") or (match and match.group(1).lower() not in (b"utf-8", b"utf8")):
            raise BadXmlError("not UTF-8")
        self.spans = _spans(data, max_depth)
        self._edits: list[tuple[int, int, bytes]] = []

    @property
    def changed(self) -> bool:
        return bool(self._edits)

    def find(self, local: str, depth: int, within: Span | None = None) -> list[Span]:
        """Elements of local name ``local`` at ``depth`` (inside ``within`` if given), in document order."""
        return [
            s
            for s in self.spans
            if s.depth == depth and s.local == local and (within is None or within.start_end <= s.start < within.end)
        ]

    def namespace_prefix(self, namespace: str, spans: list[Span]) -> str | None:
        """Prefix bound to ``namespace`` by an xmlns declaration on one of ``spans`` (outermost first), else None."""
        for span in spans:
            for key, value in span.attrs.items():
                if key.startswith("xmlns:") and value == namespace:
                    return key[len("xmlns:") :]
        return None

    def append_children(self, span: Span, fragment: bytes) -> None:
        """Insert ``fragment`` after the last child of ``span`` (expanding an empty-element tag)."""
        if span.empty:
            slash = self.data.rindex(b"/", span.start, span.start_end)
            self._edit(slash, span.start_end, b">" + fragment + b"</" + span.name.encode() + b">")
        else:
            close = self.data.rindex(b"</", span.start_end, span.end)
            self._edit(close, close, fragment)

    def insert_before(self, span: Span, fragment: bytes) -> None:
        self._edit(span.start, span.start, fragment)

    def remove(self, span: Span) -> None:
        self._edit(span.start, span.end, b"")

    def set_attribute(self, span: Span, name: str, value: str) -> None:
        """Set attribute ``name`` of ``span``'s start tag to ``value`` (added after the element name if absent)."""
        tag = self.data[span.start : span.start_end]
        quoted = quoteattr(value).encode()
        for match in _ATTRIBUTE.finditer(tag):
            if match.group(1).decode() == name:
                self._edit(span.start + match.start(3), span.start + match.end(3), quoted)
                return
        after_name = span.start + 1 + len(span.name.encode())
        self._edit(after_name, after_name, b" " + name.encode() + b"=" + quoted)

    def result(self) -> bytes:
        """The part's bytes with every splice applied (the original bytes when nothing was edited)."""
        out: list[bytes] = []
        position = 0
        for start, end, text in sorted(self._edits, key=lambda e: (e[0], e[1])):
            if start < position:
                raise ValueError("overlapping XML splices")
            out += [self.data[position:start], text]
            position = end
        out.append(self.data[position:])
        return b"".join(out)

    def _edit(self, start: int, end: int, text: bytes) -> None:
        self._edits.append((start, end, text))


def start_tag_end(data: bytes, begin: int) -> tuple[int, bool]:
    """Offset just after the start tag that begins at ``begin`` (its ``<``), and whether it is an empty-element
    tag (``<c …/>``). Attribute values may hold ``>``, so the tag is matched, not searched for."""
    match = _START_TAG.match(data, begin)
    if match is None:  # expat accepted the tag, so this only happens on a bug in _START_TAG
        raise BadXmlError(f"cannot locate the start tag at byte {begin}")
    return match.end(), bool(match.group(1))


def _spans(data: bytes, max_depth: int) -> list[Span]:
    """Offsets of every element at depth <= ``max_depth``, from expat's byte positions."""
    parser = expat.ParserCreate()
    spans: list[Span] = []
    open_spans: list[Span | None] = []

    def start(name: str, attrs: dict[str, str]) -> None:
        depth = len(open_spans)
        if depth > max_depth:
            open_spans.append(None)
            return
        begin = parser.CurrentByteIndex
        tag_end, empty = start_tag_end(data, begin)
        span = Span(name, depth, begin, tag_end, tag_end, empty, dict(attrs))
        spans.append(span)
        open_spans.append(span)

    def end(name: str) -> None:
        span = open_spans.pop()
        if span is not None and not span.empty:
            span.end = data.index(b">", parser.CurrentByteIndex) + 1

    parser.StartElementHandler = start
    parser.EndElementHandler = end
    try:
        parser.Parse(data, True)
    except expat.ExpatError as exc:
        raise BadXmlError(str(exc)) from exc
    return spans
