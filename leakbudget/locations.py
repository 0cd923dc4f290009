"""Room names → kinds of location (bathroom, kitchen, outdoor, …), through a table the user can extend.

Room names are free text ("Main bath", "Patio", "Bed 2"). A table of words says which kind of location each word
means: the built-in table (appliance_data/locations.csv) plus the user's own rows from an optional ``Locations``
sheet. A row matches a room when its words appear in the room name as whole words (case-insensitive; a trailing
plural "s" is allowed). Longer matches win over shorter ones covering the same words ("wet bar" over "wet"), and
the user's rows are tried before the built-in ones. A room may name two kinds ("Garage bath" is a garage and a
bathroom); a room no row matches is unclassified, and the review says so.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from functools import lru_cache

from leakbudget.errors import CatalogueError, WorkbookError
from leakbudget.input.schema import LOCATIONS
from leakbudget.input.table import RawTable, shipped_table

# The kinds of location the codes' rules are written against, with what each means.
LOCATION_KINDS: dict[str, str] = {
    "bathroom": "a room with a bath or shower",
    "half-bath": "a room with a basin and a toilet but no bath or shower (powder room, cloakroom)",
    "locker-room": "a locker or changing room, with showers or not (the rules ask for showers)",
    "kitchen": "a kitchen",
    "sink-area": (
        "an area with a sink: food or drink preparation (break room, tea point), a utility or mop sink, a wet bar"
    ),
    "laundry": "a laundry area",
    "garage": "a garage, service bay or vehicle repair area",
    "accessory-building": "an outbuilding: shed, workshop, barn",
    "outdoor": "outdoors: patio, porch, deck, yard, garden, pool area",
    "rooftop": "a roof, rooftop plant area or roof terrace",
    "crawl-space": "a crawl space",
    "basement": "a basement or cellar",
    "unfinished-basement": "an unfinished part of a basement (storage or work area, not habitable space)",
    "boathouse": "a boathouse",
    "aquarium": "beside an aquarium, bait well or similar open tank of water",
    "damp": "an indoor damp or wet location (wash bay, cold room)",
    "dry": "an ordinary dry room with no special requirement (bedroom, living room, office, hall)",
}
BUILT_IN_ORIGIN = "built-in room table"


@dataclass(frozen=True, slots=True)
class LocationRow:
    """One row of a room table: the words to look for and the kind of location they mean."""

    words: str  # normalised (see normalise_room)
    kind: str
    origin: str  # "built-in room table" or "your sheet 'Locations' row N"


@dataclass(frozen=True, slots=True)
class Classification:
    """What a room name was classified as; ``kinds`` is empty when no row matched."""

    room: str
    kinds: tuple[str, ...]
    matches: tuple[LocationRow, ...]

    @property
    def classified(self) -> bool:
        return bool(self.kinds)


def normalise_room(text: str) -> str:
    """Lower case, every run of characters other than letters and digits folded to one space."""
    return re.sub(r"[^0-9a-z]+", " ", text.lower()).strip()


@lru_cache(maxsize=1024)
def _pattern(words: str) -> re.Pattern[str]:
    return re.compile(r"(?<![0-9a-z])" + re.escape(words) + r"s?(?![0-9a-z])")


def rows_from_table(table: RawTable, origin_prefix: str | None = None) -> list[LocationRow]:
    """Parse room-table rows (the built-in CSV or the user's Locations sheet); kinds must be known."""
    rows: list[LocationRow] = []
    seen: dict[str, int] = {}
    for row in table.rows:
        text = table.text(row, "Room name")
        words = normalise_room(text or "")
        if not words:
            raise table.error(
                row, "Room name", "the room name is blank", hint="type a room name or a word in one, e.g. 'Snug'"
            )
        if words in seen:
            raise table.error(
                row,
                "Room name",
                f"the room name '{text}' is given twice (also row {seen[words]})",
                hint="keep one row per room name",
            )
        seen[words] = row[0]
        kind = table.choice(row, "Location kind", tuple(LOCATION_KINDS))
        if kind is None:
            raise table.error(
                row, "Location kind", "the location kind is blank", hint=f"use one of {', '.join(LOCATION_KINDS)}"
            )
        origin = BUILT_IN_ORIGIN if origin_prefix is None else f"{origin_prefix} row {row[0]}"
        rows.append(LocationRow(words, kind, origin))
    return rows


@lru_cache(maxsize=1)
def built_in() -> tuple[LocationRow, ...]:
    """The shipped room table (appliance_data/locations.csv), parsed once per process."""
    table = shipped_table("locations.csv", LOCATIONS)
    try:
        return tuple(rows_from_table(table))
    except WorkbookError as exc:  # a broken shipped file is a packaging fault, reported as such
        raise CatalogueError(str(exc)) from None


def _claim(name: str, rows: Iterable[LocationRow], taken: list[tuple[int, int]]) -> list[LocationRow]:
    """Rows whose words occur in ``name`` on characters no earlier match took, longest first."""
    hits: list[tuple[int, int, LocationRow]] = []
    for r in rows:
        for m in _pattern(r.words).finditer(name):
            hits.append((m.start(), m.end(), r))
    found: list[LocationRow] = []
    for start, end, r in sorted(hits, key=lambda h: h[0] - h[1]):  # longest match first
        if all(end <= s or start >= e for s, e in taken):
            taken.append((start, end))
            found.append(r)
    return found


def classify_room(room: str, user_rows: Sequence[LocationRow] = ()) -> Classification:
    """Classify one room name: the user's rows claim words first, then the built-in table fills the rest.

    "dry" is dropped when another kind is also named ("Bedroom balcony" is outdoors).
    """
    name = normalise_room(room)
    taken: list[tuple[int, int]] = []
    matches = _claim(name, user_rows, taken) + _claim(name, built_in(), taken)
    kinds = tuple(dict.fromkeys(r.kind for r in matches))
    if len(kinds) > 1:
        kinds = tuple(k for k in kinds if k != "dry")
    return Classification(room, kinds, tuple(matches))
