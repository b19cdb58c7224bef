"""Finding parts from what a technician reads off a board or a buyer pastes (``partsmatch find``).

A query is read two ways and the better reading of each part wins:

**A. As a part number.** The query (and each word of it that holds a digit) is normalised like
the catalog's part numbers (:func:`partsmatch.catalog.names.normalize_part_number`: case,
separators, look-alike characters O/0, I/L/1, S/5, B/8 folded), then candidates are taken from the
``pn_norm`` index only, never by a scan of the table:

1. the exact normal form;
2. every string one edit away from it (a missing, extra, changed or swapped character), looked
   up as an ``IN`` list on the index (a few hundred index probes, a few milliseconds);
3. the part numbers next to it in sorted order that share its first characters (the query
   less its last four characters): up to :data:`NEIGHBOURS` on each side, read from the index
   in order (a typed prefix, or a misread near the end);
4. only when nothing above scored :data:`GOOD_SCORE` or better and the text reading (B) found
   nothing: part numbers that *contain* the query (at most :data:`SUBSTRING_ROWS`). On PostgreSQL
   with the ``pg_trgm`` index (``ix_parts_pn_norm_trgm``, migration 0002) this ``LIKE '%x%'`` is
   answered by the trigram index; on SQLite it walks the ``pn_norm`` index (about 0.1 s at a
   million parts), which is why it is a last resort.

Candidates are scored with rapidfuzz on the normal forms: 100 for the same text up to case and
separators, 97 when equal only after folding look-alikes, otherwise the larger of
``fuzz.ratio`` (normalised Indel similarity) and a prefix/containment score
(``60 + 35 x len(query) / len(part number)`` for a prefix, ``50 + 35 x ...`` inside). Parts
below :data:`MIN_PART_NUMBER_SCORE` are dropped.

**B. As a description.** :func:`partsmatch.markings.decode_query` turns the text into ratings
(SI floats), a kind word, and words left over. Left-over words are compared with the catalog's
makers (rapidfuzz ``fuzz.ratio`` >= 85 on case-folded text, or a prefix of four letters or more)
and with descriptions (case-insensitive substring). The kind of part is the ``kind`` argument,
else the kind word, else inferred (capacitance -> capacitor; resistance or power -> resistor;
an IEC 60127 characteristic or breaking capacity -> fuse; a time (trr) -> diode; a current ->
diode or fuse; a voltage alone -> every kind; of several inferred kinds only those where the
rating has an index are searched: diode VRRM, fuse rated current, capacitor capacitance or AC
voltage). Each rating becomes an indexed range filter on its
column, with these windows (common practice, no source: wide enough to show near parts, narrow
enough to stay a short index range):

=====================  ==========================  ================  ===========================
asked                  column (kind)               window            weight below / above asked
=====================  ==========================  ================  ===========================
capacitance            capacitance (capacitor)     0.9 x .. 1.1 x    2 / 2
AC, DC voltage         voltage_ac / voltage_dc     0.8 x .. 3 x      3 / 0.5
voltage (AC/DC unsaid) voltage_ac, else _dc        0.8 x .. 3 x      3 / 0.5
voltage                vrrm (diode)                0.8 x .. 3 x      3 / 0.5
current                if_avg (diode)              0.5 x .. 3 x      2 / 0.3
time                   trr (diode)                 0.1 x .. 1.5 x    0.2 / 2
current                rated_current (fuse)        0.8 x .. 1.25 x   3 / 3
voltage                voltage / voltage_dc_fuse   0.8 x .. 3 x      3 / 0.5
breaking capacity      breaking_capacity (fuse)    0.8 x .. 100 x    2 / 0.2
resistance             resistance (resistor)       0.9 x .. 1.1 x    2 / 2
power, voltage         power / voltage_max         0.8 x .. 10 x     2 / 0.3
=====================  ==========================  ================  ===========================

A fuse's characteristic letter (IEC 60127-1) is an equality filter. Tolerance is not a filter:
a part looser than asked loses 2 points per percentage point (5 when it states none).

Each part's B score is the weighted share of the query it meets, 0-100: every rating piece
scores ``1 - w x |ln(value / asked)| / (10 x ln 1.1)`` (so a value 10 % off costs 0.1 per unit of
weight; the log ratio treats 0.5 x and 2 x alike), clipped at 0, weighted 3 for capacitance, a
fuse's rated current and a resistance and 2 for the other ratings; a matched maker word counts
2, every other word 1. The score is computed in SQL (``ln`` exists in PostgreSQL and in SQLite
builds with math functions; a Python ``ln`` is registered on SQLite builds without) so that the
database returns only the best rows of a window that may hold tens of thousands of parts; Python
recomputes the same score for the rows returned and writes the reasons. How many rows the
database reads depends on the catalog, not on its size alone:

* A. When thousands of parts meet every asked value exactly (a large catalog holds thousands of
  0.95 uF / 2100 VAC capacitors), the answer is the first of that top band in maker and part
  number order; it is read along the (maker, part_number) index, over only as many makers as
  the band's size (an index-only count) says are needed, when that costs less than B.
* B. Otherwise the distinct values of the indexed rating (an index-only ``GROUP BY``) are taken
  nearest first, and rows are read for those values only, widening until no part further out
  could reach the last score kept. The result is exactly that of ranking the whole window
  (the tests compare it with an exhaustive ranking).

On SQLite the rating index, or the (maker, part_number) index, is named with ``INDEXED BY``
(SQLite plans without statistics unless the catalog was analysed).

Hits are ordered by score (descending), then maker, then part number, in code-point order on
both databases (PostgreSQL sorts with ``COLLATE "C"`` where its database collation is not
byte order), so SQLite and PostgreSQL return the same hits for the same data.

Bad input never raises anything but a :class:`partsmatch.errors.PartsmatchError`: an empty
query, a query longer than :data:`MAX_QUERY` characters, an unknown kind or a limit outside
1..:data:`MAX_LIMIT` are an :class:`InputError`; a database failure is a :class:`DatabaseError`.
"""

from __future__ import annotations

import math
import re
import weakref
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Iterable, Sequence

from sqlalchemy import and_, case, event, exists, func, literal, or_, select, text
from sqlalchemy.exc import SQLAlchemyError

from partsmatch.catalog.tables import KINDS, parts, stock
from partsmatch.catalog.names import normalize_part_number
from partsmatch.catalog.names import strip_separators as _key  # look-alikes kept as printed
from partsmatch.catalog.records import PartRecord
from partsmatch.errors import DatabaseError, InputError, PartsmatchError, short_message

if TYPE_CHECKING:
    from sqlalchemy import Connection
    from sqlalchemy.orm import Session

    #: What the lookup reads through: an ORM session or a Core connection.
    Reader = Session | Connection

#: The columns of the tables the lookup reads (Core: the lookup needs no ORM).
P, S = parts.c, stock.c

#: Longest query accepted (characters, after collapsing whitespace).
MAX_QUERY = 200
#: Largest ``limit``.
MAX_LIMIT = 1000
#: Part-number hits below this score are dropped.
MIN_PART_NUMBER_SCORE = 60.0
#: A part-number score this high stops the containment search (step 4).
GOOD_SCORE = 80.0
#: Sorted-order neighbours read on each side of the query (step 3).
NEIGHBOURS = 40
#: Most rows read by the containment search (step 4) and by a text-only search.
SUBSTRING_ROWS = 200
#: Most part-number strings tried for one query (the whole query and words with digits).
MAX_PN_QUERIES = 4
#: Edit neighbourhoods are built for normal forms of this length range.
EDIT_MIN, EDIT_MAX = 3, 40
#: Maker names compared with the query's words (read once per call with an index skip-scan).
MAX_MAKERS = 5000

#: Characters a normal form can hold that an edit may insert or substitute (O, Q, I, L, S, B
#: are folded away by the normalisation).
_ALPHABET = "0123456789ACDEFGHJKMNPRTUVWXYZ"
#: One unit of weight costs this many points per unit of |ln ratio| (10 points at 10 % off).
_K = 10.0 / math.log(1.1)


@dataclass(frozen=True)
class Hit:
    """One part found by :func:`find`.

    Attributes:
        part: the part with its stock lines (locations and quantities).
        score: 0-100, higher is closer to the query (rounded to 0.1).
        matched: why it matched, one reason each, e.g. ``"part number ~ 93"``,
            ``"capacitance 950 nF (asked 950 nF)"``, ``"maker Brakemoor"``,
            ``"description has 'oven'"``.
        how: which readings found it: ``part_number``, ``ratings``, ``maker``, ``description``.
    """

    part: PartRecord
    score: float
    matched: tuple[str, ...] = ()
    how: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {"part": self.part.to_dict(), "score": self.score, "matched": list(self.matched),
                "how": list(self.how)}


# --------------------------------------------------------------------------- backend facts


@dataclass(frozen=True)
class _Backend:
    dialect: str
    byte_order: bool  # text compares in code-point order (SQLite; PostgreSQL with C collation)
    trgm: bool        # PostgreSQL trigram index on parts.pn_norm
    has_ln: bool      # SQL ln() available
    maker_index: str | None = None  # SQLite name of the (maker, part_number) unique index


_BACKENDS: "weakref.WeakKeyDictionary[Any, _Backend]" = weakref.WeakKeyDictionary()


def _backend(session: Reader) -> _Backend:
    """What the database offers, detected once per engine."""
    engine = _engine_of(session)
    known = _BACKENDS.get(engine)
    if known is not None:
        return known
    dialect = engine.dialect.name
    byte_order, trgm, has_ln = dialect == "sqlite", False, True
    if dialect == "postgresql":
        collate = session.execute(text(
            "SELECT datcollate FROM pg_database WHERE datname = current_database()")).scalar()
        byte_order = str(collate) in ("C", "POSIX") or str(collate).startswith("C.")
        trgm = session.execute(text(
            "SELECT 1 FROM pg_indexes WHERE indexname = 'ix_parts_pn_norm_trgm'")).first() is not None
    maker_index = None
    if dialect == "sqlite":
        try:  # a failed SELECT leaves a SQLite transaction as it was
            session.execute(text("SELECT ln(2.0)"))
        except SQLAlchemyError:
            has_ln = False
        # a UNIQUE constraint is an automatic index on SQLite, named by SQLite
        for (name,) in session.execute(text(
                "SELECT name FROM pragma_index_list('parts') ORDER BY name")):
            cols = [r[0] for r in session.execute(
                text("SELECT name FROM pragma_index_info(:n) ORDER BY seqno"), {"n": name})]
            if cols == ["maker", "part_number"]:
                maker_index = name
                break
    if dialect == "sqlite" and not event.contains(engine, "before_cursor_execute", _put_index):
        event.listen(engine, "before_cursor_execute", _put_index, retval=True)
    info = _Backend(dialect, byte_order, trgm, has_ln, maker_index)
    _BACKENDS[engine] = info
    return info


def _engine_of(session: Reader):
    """The engine behind a session or a connection."""
    if hasattr(session, "get_bind"):  # an ORM session
        bind = session.get_bind()
        return getattr(bind, "engine", bind)
    return session.engine


def _ensure_ln(session: Reader, be: _Backend) -> None:
    """Register a Python ``ln`` on a SQLite build without math functions."""
    if be.has_ln or be.dialect != "sqlite":
        return
    conn = session.connection() if hasattr(session, "get_bind") else session
    raw = conn.connection.driver_connection
    raw.create_function("ln", 1, _py_ln, deterministic=True)


def _py_ln(x: float | None) -> float | None:
    try:
        return math.log(x) if x is not None and x > 0 else None
    except (TypeError, ValueError):
        return None


def _c(col, be: _Backend):
    """A text column compared / sorted in code-point order on every database."""
    if be.dialect == "postgresql" and not be.byte_order:
        return col.collate("C")
    return col


# --------------------------------------------------------------------------- the query


@dataclass
class _Query:
    text: str
    ratings: dict[str, float | str]
    kind_hint: str | None
    words: list[str]            # left-over words without digits (maker / description)
    pn_texts: list[str]         # normal forms to try as part numbers
    maker_words: dict[str, str] = field(default_factory=dict)  # word -> matched maker(s) note
    makers: list[str] = field(default_factory=list)            # catalog makers matched
    desc_words: list[str] = field(default_factory=list)
    maker_filter: list[str] | None = None                      # from MAKER:PART
    catalog_makers: list[str] | None = None                    # read once, when needed


def _clean(query: object) -> str:
    if not isinstance(query, str):
        raise InputError(f"the query must be text, not {type(query).__name__}", value=query)
    cleaned = "".join(ch for ch in query if ch.isprintable() or ch.isspace())
    cleaned = " ".join(cleaned.split())
    if not cleaned:
        raise InputError("empty query: give a part number, a marking (105J, T2A), ratings "
                         "(0.95uF 2100VAC) or words of a description", value=query)
    if len(cleaned) > MAX_QUERY:
        raise InputError(f"query longer than {MAX_QUERY} characters ({len(cleaned)})",
                         value=query[:40])
    return cleaned


def _norm(s: str) -> str:
    return normalize_part_number(s)[:80]


def _ascii_lower(s: str) -> str:
    """Lower-case ASCII letters only: what SQLite's lower() does (PostgreSQL folds all)."""
    return s.translate(_ASCII_LOWER)


_UPPER, _LOWER = "ABCDEFGHIJKLMNOPQRSTUVWXYZ", "abcdefghijklmnopqrstuvwxyz"
_ASCII_LOWER = str.maketrans(_UPPER, _LOWER)


def _lower_sql(col, be: "_Backend"):
    """ASCII-only lower case in SQL on every database (PostgreSQL's lower() folds all letters,
    SQLite's only ASCII), so that a word matches the same descriptions on both."""
    if be.dialect == "sqlite":
        return func.lower(col)
    return func.translate(col, _UPPER, _LOWER)


def _parse(text_: str) -> _Query:
    from partsmatch.markings import decode_query

    qr = decode_query(text_)
    ratings = {k: v for k, v in qr.ratings.items() if k != "kind_hint"}
    pn_texts: list[str] = []

    def add(s: str) -> None:
        n = _norm(s)
        if len(n) >= 2 and n not in pn_texts and len(pn_texts) < MAX_PN_QUERIES:
            pn_texts.append(n)

    tokens = text_.split()
    spec_only = len(tokens) > 1 and not qr.unread
    if not spec_only:
        add(text_)
    for word in qr.unread:
        if any(ch.isdigit() for ch in word) and len(tokens) > 1:
            add(word)
    words = []
    for word in qr.unread:
        w = word.strip(".,;:()[]\"'")
        if len(w) >= 2 and not any(ch.isdigit() for ch in w) and w not in words:
            words.append(w)
    return _Query(text_, ratings, qr.kind_hint, words, pn_texts)


# --------------------------------------------------------------------------- makers


def _catalog_makers(session: Reader, q: _Query) -> list[str]:
    """Every distinct maker, by an index skip-scan (one seek per maker, not a table scan);
    read once per :func:`find` call (kept on its query)."""
    if q.catalog_makers is not None:
        return q.catalog_makers
    rows = session.execute(text(
        "WITH RECURSIVE m(maker) AS ("
        " SELECT min(maker) FROM parts"
        " UNION ALL"
        " SELECT (SELECT min(p.maker) FROM parts p WHERE p.maker > m.maker)"
        " FROM m WHERE m.maker IS NOT NULL)"
        f" SELECT maker FROM m WHERE maker IS NOT NULL LIMIT {MAX_MAKERS}"))
    q.catalog_makers = [r[0] for r in rows]
    return q.catalog_makers


def _match_makers(q: _Query, makers: list[str]) -> None:
    """Split the query's words into maker words and description words."""
    from rapidfuzz import fuzz, process

    folded = [m.casefold() for m in makers]
    found: list[str] = []
    for word in q.words:
        w = word.casefold()
        hits = {makers[i] for _m, _s, i in process.extract(
            w, folded, scorer=fuzz.ratio, score_cutoff=85, limit=None)}
        if len(w) >= 4:
            hits |= {makers[i] for i, m in enumerate(folded) if m.startswith(w)}
        if hits:
            q.maker_words[word] = ", ".join(sorted(hits))
            found.extend(h for h in sorted(hits) if h not in found)
        else:
            q.desc_words.append(word)
    q.makers = found


# --------------------------------------------------------------------------- rating terms


@dataclass(frozen=True)
class _Term:
    key: str                  # rating asked (query key)
    columns: tuple[str, ...]  # first non-null column is compared (coalesce)
    asked: float
    lo: float
    hi: float
    w_below: float
    w_above: float
    weight: float
    unit: str
    label: str


_VOLT = (0.8, 3.0, 3.0, 0.5)
_LABELS = {"voltage_ac": "AC voltage", "voltage_dc": "DC voltage", "vrrm": "VRRM",
           "if_avg": "IF(AV)", "trr": "trr", "rated_current": "rated current",
           "voltage": "voltage", "voltage_dc_fuse": "DC voltage",
           "breaking_capacity": "breaking capacity", "capacitance": "capacitance",
           "resistance": "resistance", "power": "power", "voltage_max": "max voltage"}
_UNITS = {"capacitance": "F", "voltage_ac": "V", "voltage_dc": "V", "vrrm": "V", "if_avg": "A",
          "trr": "s", "rated_current": "A", "voltage": "V", "voltage_dc_fuse": "V",
          "breaking_capacity": "A", "resistance": "ohm", "power": "W", "voltage_max": "V"}
#: Indexed rating column per kind, most selective first ((kind, column) indexes of models.py).
_INDEXED = {"capacitor": ("capacitance", "voltage_ac"), "diode": ("vrrm",),
            "fuse": ("rated_current",), "resistor": ("resistance",)}


def _first(r: dict[str, float | str], *keys: str) -> tuple[str, float] | None:
    for k in keys:
        v = r.get(k)
        if isinstance(v, float) and math.isfinite(v) and 0 < v < 1e30:
            return k, v
    return None


def _term(key: str, value: float, columns: tuple[str, ...], lo: float, hi: float,
          w_below: float, w_above: float, weight: float) -> _Term:
    return _Term(key, columns, value, value * lo, value * hi, w_below, w_above, weight,
                 _UNITS[columns[0]], _LABELS[columns[0]])


def _terms_for(kind: str, r: dict[str, float | str]) -> list[_Term]:
    """The range filters the query's ratings make for one kind of part (module docstring)."""
    out: list[_Term] = []
    if kind == "capacitor":
        if (kv := _first(r, "capacitance")):
            out.append(_term(*kv, ("capacitance",), 0.9, 1.1, 2, 2, 3))
        if (kv := _first(r, "voltage_ac")):
            out.append(_term(*kv, ("voltage_ac",), *_VOLT, 2))
        if (kv := _first(r, "voltage_dc")):
            out.append(_term(*kv, ("voltage_dc",), *_VOLT, 2))
        if (kv := _first(r, "voltage")) and not _first(r, "voltage_ac", "voltage_dc"):
            out.append(_term(*kv, ("voltage_ac", "voltage_dc"), *_VOLT, 2))
    elif kind == "diode":
        if (kv := _first(r, "voltage", "voltage_dc", "voltage_ac")):
            out.append(_term(*kv, ("vrrm",), *_VOLT, 2))
        if (kv := _first(r, "current", "rated_current")):
            out.append(_term(*kv, ("if_avg",), 0.5, 3.0, 2, 0.3, 2))
        if (kv := _first(r, "time")):
            out.append(_term(*kv, ("trr",), 0.1, 1.5, 0.2, 2, 2))
    elif kind == "fuse":
        if (kv := _first(r, "rated_current", "current")):
            out.append(_term(*kv, ("rated_current",), 0.8, 1.25, 3, 3, 3))
        if (kv := _first(r, "voltage", "voltage_ac")):
            out.append(_term(*kv, ("voltage",), *_VOLT, 2))
        if (kv := _first(r, "voltage_dc_fuse", "voltage_dc")):
            out.append(_term(*kv, ("voltage_dc_fuse",), *_VOLT, 2))
        if (kv := _first(r, "breaking_capacity")):
            out.append(_term(*kv, ("breaking_capacity",), 0.8, 100.0, 2, 0.2, 2))
    elif kind == "resistor":
        if (kv := _first(r, "resistance")):
            out.append(_term(*kv, ("resistance",), 0.9, 1.1, 2, 2, 3))
        if (kv := _first(r, "power")):
            out.append(_term(*kv, ("power",), 0.8, 10.0, 2, 0.3, 2))
        if (kv := _first(r, "voltage", "voltage_dc", "voltage_ac")):
            out.append(_term(*kv, ("voltage_max",), 0.8, 10.0, 2, 0.3, 2))
    return out


def _kinds_for(q: _Query, kind: str | None) -> list[str]:
    if kind:
        return [kind]
    if q.kind_hint:
        return [q.kind_hint]
    r = q.ratings
    if "capacitance" in r:
        return ["capacitor"]
    if "resistance" in r or "power" in r:
        return ["resistor"]
    if "characteristic" in r or "breaking_capacity" in r or "rated_current" in r:
        return ["fuse"]
    if "time" in r:
        return ["diode"]
    if "current" in r:
        return ["diode", "fuse"]
    if any(k in r for k in ("voltage", "voltage_ac", "voltage_dc")):
        return ["capacitor", "diode", "fuse", "resistor"]
    return []


def _tolerance_asked(r: dict[str, float | str]) -> float | None:
    vals = [v for k in ("tolerance_minus", "tolerance_plus")
            if isinstance(v := r.get(k), float) and math.isfinite(v)]
    return max(vals) if vals else None


# --------------------------------------------------------------------------- scoring (SQL and Python)


def _rating_closeness(value: float | None, t: _Term) -> float:
    """Python twin of :func:`_rating_sql`: 1 at the asked value, 0 far away."""
    if value is None or not value > 0:
        return 0.0
    if value >= t.asked:
        pen = t.w_above * math.log(value / t.asked) * _K / 100.0
    else:
        pen = t.w_below * math.log(t.asked / value) * _K / 100.0
    return 0.0 if pen > 1.0 else 1.0 - pen


def _rating_sql(t: _Term, colexpr):
    q = literal(t.asked)
    pen = case(
        (colexpr >= q, literal(t.w_above * _K / 100.0) * func.ln(colexpr / q)),
        else_=literal(t.w_below * _K / 100.0) * func.ln(q / colexpr))
    return case((pen > 1.0, literal(0.0)), else_=literal(1.0) - pen)


def _tolerance_penalty(tm: float | None, tp: float | None, asked: float) -> float:
    """Points lost by a tolerance looser than asked (2 per percentage point; 5 if none)."""
    if tm is None or tp is None:
        return 5.0
    worst = tp if tp > tm else tm
    return 2.0 * (worst - asked) if worst > asked else 0.0


def _tolerance_sql(asked: float):
    worst = case((P.tolerance_plus > P.tolerance_minus, P.tolerance_plus),
                 else_=P.tolerance_minus)
    return case(
        (or_(P.tolerance_minus.is_(None), P.tolerance_plus.is_(None)), literal(5.0)),
        (worst > asked, literal(2.0) * (worst - asked)),
        else_=literal(0.0))


def _like_word(w: str) -> str:
    esc = w.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_")
    return f"%{_ascii_lower(esc)}%"


# --------------------------------------------------------------------------- part-number reading


def _edits1(s: str) -> set[str]:
    """Strings one edit from ``s``: deletion, adjacent transposition, substitution, insertion."""
    letters = set(_ALPHABET) | set(s)
    splits = [(s[:i], s[i:]) for i in range(len(s) + 1)]
    out = {a + b[1:] for a, b in splits if b}
    out |= {a + b[1] + b[0] + b[2:] for a, b in splits if len(b) > 1}
    out |= {a + c + b[1:] for a, b in splits if b for c in letters}
    out |= {a + c + b for a, b in splits for c in letters}
    out.discard(s)
    return {x for x in out if len(x) <= 80}


def _next_prefix(p: str) -> str | None:
    """The smallest string greater than every string starting with ``p`` (code-point order)."""
    while p:
        last = ord(p[-1])
        if last < 0x10FFFF and not 0xD7FF <= last < 0xE000:
            return p[:-1] + chr(last + 1)
        p = p[:-1]
    return None


def _pn_score(qn: str, q_key: str, pn_norm: str, part_number: str) -> tuple[float, str]:
    from rapidfuzz import fuzz

    if pn_norm == qn:
        if _key(part_number) == q_key:
            return 100.0, f"part number = {part_number}"
        return 97.0, f"part number = {part_number} (look-alike characters O/0 I/1 S/5 B/8 folded)"
    score = float(fuzz.ratio(qn, pn_norm))
    why = f"part number ~ {score:.0f}"
    if len(pn_norm) > 0 and pn_norm.startswith(qn):
        s = 60.0 + 35.0 * len(qn) / len(pn_norm)
        if s > score:
            score, why = s, f"part number starts with {qn}"
    elif len(qn) >= 3 and qn in pn_norm:
        s = 50.0 + 35.0 * len(qn) / len(pn_norm)
        if s > score:
            score, why = s, f"part number contains {qn}"
    return score, why


# --------------------------------------------------------------------------- find


def find(session: Reader, query: str, kind: str | None = None, in_stock: bool = False,
         limit: int = 20) -> list[Hit]:
    """Parts matching ``query``, best first (see the module docstring for the method).

    Args:
        session: an open session on the catalog.
        query: a part number as read off a board (worn print, any case and separators), a
            marking ("105J", "T 2A 250V"), ratings ("0.95uF 2100VAC 3%", "12 kV 350 mA diode"),
            a maker or words of a description.
        kind: only parts of this kind (capacitor, diode, fuse, resistor).
        in_stock: only parts with a stock line of quantity > 0.
        limit: at most this many hits (1..MAX_LIMIT).

    Returns:
        Hits ordered by score (descending), maker, part number; each with its stock lines and
        the reasons it matched. An empty list when nothing matches.

    Raises:
        InputError: empty or over-long query, unknown kind, limit out of range.
        DatabaseError: the database failed.
    """
    text_ = _clean(query)
    if kind is not None and kind not in KINDS:
        raise InputError(f"kind must be one of {', '.join(KINDS)}", value=kind)
    if isinstance(limit, bool) or not isinstance(limit, int) or not 1 <= limit <= MAX_LIMIT:
        raise InputError(f"limit must be a whole number from 1 to {MAX_LIMIT}", value=limit)
    try:
        return _find(session, text_, kind, bool(in_stock), limit)
    except PartsmatchError:
        raise
    except SQLAlchemyError as exc:
        raise DatabaseError(f"find failed: {short_message(exc)}") from None


@dataclass
class _Cand:
    score: float = 0.0
    matched: list[str] = field(default_factory=list)
    how: list[str] = field(default_factory=list)
    maker: str = ""
    part_number: str = ""

    def add(self, score: float, reasons: Iterable[str], how: str) -> None:
        self.score = max(self.score, score)
        for r in reasons:
            if r not in self.matched:
                self.matched.append(r)
        if how not in self.how:
            self.how.append(how)


def _find(session: Reader, text_: str, kind: str | None, in_stock: bool,
          limit: int) -> list[Hit]:
    be = _backend(session)
    q = _parse(text_)
    if ":" in text_:
        left, right = (s.strip() for s in text_.split(":", 1))
        if left and right:
            makers = [m for m in _catalog_makers(session, q) if m.casefold() == left.casefold()]
            if makers:
                q.maker_filter = makers
                q.pn_texts = [n for n in [_norm(right)] if len(n) >= 2]
    if q.words:
        _match_makers(q, _catalog_makers(session, q))

    filters = []
    if kind:
        filters.append(P.kind == kind)
    if in_stock:
        filters.append(exists().where(S.part_id == P.id, S.quantity > 0))
    if q.maker_filter:
        filters.append(P.maker.in_(q.maker_filter))

    cands: dict[int, _Cand] = {}
    best_pn = 0.0
    q_key = _key(text_)
    for qn in q.pn_texts:
        key = q_key if qn == _norm(text_) else _key(qn)
        for pid, pn_norm, maker, pn in _pn_candidates(session, be, qn, filters):
            score, why = _pn_score(qn, key, pn_norm, pn)
            if score >= MIN_PART_NUMBER_SCORE:
                c = cands.setdefault(pid, _Cand(maker=maker, part_number=pn))
                c.add(score, [why], "part_number")
                best_pn = max(best_pn, score)

    text_hits = _text_reading(session, be, q, kind, filters, limit,
                              scan_descriptions=best_pn < GOOD_SCORE)
    for pid, (score, reasons, how, maker, pn) in text_hits.items():
        c = cands.setdefault(pid, _Cand(maker=maker, part_number=pn))
        for h in how:
            c.add(score, reasons, h)

    if best_pn < GOOD_SCORE and not text_hits:
        for qn in q.pn_texts[:1]:
            if len(qn) < 3:
                continue
            for pid, pn_norm, maker, pn in _pn_contains(session, be, qn, filters):
                score, why = _pn_score(qn, q_key, pn_norm, pn)
                if score >= MIN_PART_NUMBER_SCORE:
                    cands.setdefault(pid, _Cand(maker=maker, part_number=pn)).add(
                        score, [why], "part_number")

    ranked = sorted(cands.items(),
                    key=lambda kv: (-round(kv[1].score, 1), kv[1].maker, kv[1].part_number))
    ranked = ranked[:limit]
    if not ranked:
        return []
    records = _records(session, [pid for pid, _ in ranked])
    return [Hit(records[pid], round(min(100.0, max(0.0, c.score)), 1), tuple(c.matched),
                tuple(c.how)) for pid, c in ranked if pid in records]


def _records(session: Reader, ids: Sequence[int]) -> dict[int, PartRecord]:
    from partsmatch.catalog.queries import records

    rows = list(session.execute(select(parts).where(P.id.in_(list(ids)))))
    return {r.id: r for r in records(session, rows)}  # type: ignore[misc]


_PN_COLS = (P.id, P.pn_norm, P.maker, P.part_number)


def _pn_candidates(session: Reader, be: _Backend, qn: str, filters: list) -> list[tuple]:
    """Steps 1-3 of the part-number reading: exact, one edit away, sorted-order neighbours."""
    rows: dict[int, tuple] = {}
    probes = [qn]
    if EDIT_MIN <= len(qn) <= EDIT_MAX:
        probes += sorted(_edits1(qn))
    for i in range(0, len(probes), 500):
        stmt = select(*_PN_COLS).where(P.pn_norm.in_(probes[i:i + 500]), *filters)
        for r in session.execute(stmt):
            rows[r[0]] = tuple(r)
    prefix = qn[:max(min(len(qn), 3), len(qn) - 4)]
    for r in _neighbours(session, be, qn, prefix, filters):
        rows[r[0]] = r
    return list(rows.values())


def _prefix_filter(be: _Backend, prefix: str):
    if be.byte_order:
        upper = _next_prefix(prefix)
        cond = P.pn_norm >= prefix
        return and_(cond, P.pn_norm < upper) if upper is not None else cond
    esc = prefix.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_")
    return P.pn_norm.like(esc + "%", escape="\\")


def _neighbours(session: Reader, be: _Backend, qn: str, prefix: str, filters: list) -> list[tuple]:
    """Part numbers sharing ``prefix`` next to ``qn`` in code-point order, both sides."""
    col = _c(P.pn_norm, be)
    pre = _prefix_filter(be, prefix)
    after = (select(*_PN_COLS).where(pre, col >= qn, *filters)
             .order_by(col).limit(NEIGHBOURS))
    before = (select(*_PN_COLS).where(pre, col < qn, *filters)
              .order_by(col.desc()).limit(NEIGHBOURS))
    out: list[tuple] = []
    for stmt in (after, before):
        got = [tuple(r) for r in session.execute(stmt)]
        out += _complete_ties(session, got, NEIGHBOURS, filters)
    return out


def _complete_ties(session: Reader, got: list[tuple], cap: int, filters: list) -> list[tuple]:
    """A LIMIT may cut a run of equal normal forms: fetch the whole run at the boundary, so that
    the set does not depend on the order a database returns equal keys in."""
    if len(got) < cap:
        return got
    last = got[-1][1]
    kept = [r for r in got if r[1] != last]
    stmt = select(*_PN_COLS).where(P.pn_norm == last, *filters).limit(1000)
    return kept + [tuple(r) for r in session.execute(stmt)]


def _pn_contains(session: Reader, be: _Backend, qn: str, filters: list) -> list[tuple]:
    """Step 4: part numbers containing ``qn`` (trigram index on PostgreSQL; index walk on SQLite)."""
    col = _c(P.pn_norm, be)
    if be.dialect == "sqlite":
        cond = func.instr(P.pn_norm, qn) > 0
    else:
        esc = qn.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_")
        cond = P.pn_norm.like(f"%{esc}%", escape="\\")
    stmt = select(*_PN_COLS).where(cond, *filters).order_by(col).limit(SUBSTRING_ROWS)
    got = [tuple(r) for r in session.execute(stmt)]
    return _complete_ties(session, got, SUBSTRING_ROWS, filters)


# --------------------------------------------------------------------------- text reading (B)


def _text_reading(session: Reader, be: _Backend, q: _Query, kind: str | None, filters: list,
                  limit: int, scan_descriptions: bool = True,
                  ) -> dict[int, tuple[float, list[str], list[str], str, str]]:
    """Ratings, maker and description words: part id -> (score, reasons, how, maker, pn).

    A query of description words alone (no rating, no maker) reads every description (no index
    serves a word inside a text): that runs only when ``scan_descriptions`` is true, which
    :func:`find` sets when the part-number reading found nothing good.
    """
    has_ratings = any(k in q.ratings for k in (
        "capacitance", "resistance", "voltage", "voltage_ac", "voltage_dc", "voltage_dc_fuse",
        "current", "rated_current", "time", "power", "breaking_capacity", "characteristic"))
    if not (has_ratings or q.makers or (q.desc_words and scan_descriptions)):
        return {}
    fetch = limit * 2 + 20
    out: dict[int, tuple[float, list[str], list[str], str, str]] = {}
    if has_ratings:
        _ensure_ln(session, be)
        plans = []
        for k in _kinds_for(q, kind):
            terms = _terms_for(k, q.ratings)
            char = q.ratings.get("characteristic") if k == "fuse" else None
            if terms or char:
                plans.append((k, terms, char))
        if not (kind or q.kind_hint) and len(plans) > 1:
            # an inferred kind (a bare voltage or current) is searched only where that rating
            # has an index; naming the kind searches the others
            indexed = [p for p in plans if _primary(p[0], p[1]) is not None]
            plans = indexed or plans
        for k, terms, char in plans:
            out.update(_rated(session, be, q, k, terms, char, filters, fetch, limit))
    elif q.makers:
        out.update(_rated(session, be, q, kind or q.kind_hint, [], None,
                          filters + [P.maker.in_(q.makers)], fetch, limit))
    else:
        likes = [_lower_sql(P.description, be).like(_like_word(w), escape="\\")
                 for w in q.desc_words]
        hint = q.kind_hint if not kind else None
        # parts with every word (and the kind word's kind) have the top score: read them in
        # maker and part-number order among the first makers and stop at ``fetch`` (a few
        # hundred rows for common words); only when fewer than ``limit`` turn up there is every
        # description scored (a full read: about 1-2 s at a million parts on SQLite)
        every = likes + ([P.kind == hint] if hint else [])
        makers = _catalog_makers(session, q)
        if makers:  # the first makers only (~2 %): a rare word would otherwise walk them all
            every.append(P.maker <= makers[len(makers) // 50])
        top = _rated(session, be, q, None, [], None, filters + every, fetch, limit,
                     kind_piece=hint, maker_order=True)
        if len(top) >= limit:
            return top
        out.update(_rated(session, be, q, None, [], None, filters + [or_(*likes)], fetch,
                          limit, cap=SUBSTRING_ROWS, kind_piece=hint))
    return out


def _rated(session: Reader, be: _Backend, q: _Query, kind: str | None, terms: list[_Term],
           char: object, filters: list, fetch: int, limit: int, cap: int | None = None,
           kind_piece: str | None = None, maker_order: bool = False,
           ) -> dict[int, tuple[float, list[str], list[str], str, str]]:
    """One SQL query: the window of every term, scored in SQL, best ``fetch`` rows.

    ``kind_piece``: a kind word of a text-only query, scored (weight 1) rather than filtered,
    since such a word ("bleeder") may equally be a word of a description.
    """
    conds = list(filters)
    if kind:
        conds.append(P.kind == kind)
    if isinstance(char, str):
        conds.append(P.characteristic == char)
    pieces = []  # (weight, sql closeness)
    for t in terms:
        cols = [P[c] for c in t.columns]
        colexpr = cols[0] if len(cols) == 1 else func.coalesce(*cols)
        conds.append(colexpr.between(t.lo, t.hi))
        pieces.append((t.weight, _rating_sql(t, colexpr)))
    for _w in q.maker_words:
        pieces.append((2.0, case((P.maker.in_(q.makers), literal(1.0)), else_=literal(0.0))))
    for w in q.desc_words:
        pieces.append((1.0, case((_lower_sql(P.description, be).like(_like_word(w), escape="\\"),
                                  literal(1.0)), else_=literal(0.0))))
    if kind_piece:
        pieces.append((1.0, case((P.kind == kind_piece, literal(1.0)), else_=literal(0.0))))
    tol = _tolerance_asked(q.ratings) if kind == "capacitor" else None
    total = sum(w for w, _ in pieces)
    if total > 0:
        score = literal(0.0)
        for w, expr in pieces:
            score = score + literal(100.0 * w / total) * expr
    else:
        score = literal(100.0)
    if tol is not None:
        score = score - _tolerance_sql(tol)
    colnames = sorted({c for t in terms for c in t.columns})
    cols = [P.id, P.maker, P.part_number, P.kind, P.description,
            P.tolerance_minus, P.tolerance_plus, P.characteristic,
            *[P[c] for c in colnames]]
    base = select(*cols, score.label("score")).where(*conds)
    by_score = (score.desc(), _c(P.maker, be), _c(P.part_number, be))
    primary = _primary(kind, terms)

    def run(stmt, index: str | None = None,
            ) -> dict[int, tuple[float, list[str], list[str], str, str]]:
        return _process(_execute(session, be, stmt, index), q, terms, char, total, tol,
                        kind_piece)

    if maker_order:  # every row has the same score: the first in maker order
        return run(base.order_by(_c(P.maker, be), _c(P.part_number, be)).limit(fetch),
                   be.maker_index)
    if primary is None:
        return run(base.order_by(*by_score).limit(cap or fetch))
    index = f"ix_parts_kind_{primary.columns[0]}" if be.dialect == "sqlite" else None
    pcol = P[primary.columns[0]]
    share = 100.0 * primary.weight / total

    # A. Many parts may meet every asked value exactly (a catalog holds thousands of 0.95 uF /
    # 2100 VAC parts): the best are then the first of that top band in maker and part-number
    # order, read along the (maker, part_number) index over as few makers as the band's size
    # suggests, rather than every row of the window.
    band = _band_rows(session, be, base, score, kind, primary, pcol, fetch, q)
    if band is not None:
        hits = run(band, be.maker_index)
        if sum(1 for v in hits.values() if round(v[0], 1) >= 100.0) >= limit:
            return hits

    # B. Distinct values of the primary (indexed) rating, nearest first, from an index-only
    # GROUP BY; rows are read for the nearest values only, widening until no part further out
    # could reach the last score kept (its primary rating alone would cost it more).
    groups = [tuple(r) for r in _execute(session, be, select(pcol, func.count()).where(
        P.kind == kind, pcol.between(primary.lo, primary.hi)).group_by(pcol), index)]
    groups.sort(key=lambda g: (1.0 - _rating_closeness(g[0], primary), g[0]))
    want, taken = fetch, 0
    while True:
        n = 0
        while taken < len(groups) and (n < want or taken == 0):
            n += groups[taken][1]
            taken += 1
        values = [g[0] for g in groups[:taken]]
        if not values:
            return {}
        window = pcol.between(min(values), max(values))
        hits = run(base.where(window).order_by(*by_score).limit(fetch), index)
        if taken >= len(groups):
            return hits
        bound = 100.0 - share * (1.0 - _rating_closeness(groups[taken][0], primary))
        scores = sorted((v[0] for v in hits.values()), reverse=True)
        if len(scores) >= limit and scores[limit - 1] > bound + 1e-6:
            return hits
        want *= 4


def _primary(kind: str | None, terms: list[_Term]) -> _Term | None:
    """The term on the kind's most selective indexed column (models.py (kind, rating) indexes)."""
    if kind not in _INDEXED:
        return None
    for col in _INDEXED[kind]:
        for t in terms:
            if t.columns == (col,):
                return t
    return None


#: The top band: parts whose score rounds to 100.0.
_BAND = 99.9


def _band_rows(session: Reader, be: _Backend, base, score, kind: str, primary: _Term, pcol,
               fetch: int, q: _Query):
    """Statement for step A, or None when the band looks too small to be worth it."""
    if not be.byte_order or (be.dialect == "sqlite" and not be.maker_index):
        return None  # maker order would need a sort of the whole table
    exact = pcol.between(primary.asked * (1 - 1e-9), primary.asked * (1 + 1e-9))
    index = f"ix_parts_kind_{primary.columns[0]}" if be.dialect == "sqlite" else None
    stmt = select(func.count()).select_from(parts).where(P.kind == kind, exact)
    in_band = _execute(session, be, stmt, index).scalar() or 0
    if in_band < 3 * fetch:
        return None
    # rows A expects to read (half of the exact-primary parts assumed to meet the other terms)
    # against the rows B reads for the exact primary value: take the cheaper
    if not q.maker_words:  # with a maker word A reads only that maker's parts
        rows = session.execute(select(func.max(P.id))).scalar() or 0
        if 2.0 * fetch * rows / in_band > in_band:
            return None
    makers = q.makers if q.maker_words else _catalog_makers(session, q)
    if not makers:
        return None
    # makers to read so that about 4 x fetch band parts are expected among them
    share = min(1.0, 4.0 * fetch / in_band)
    upto = makers[min(len(makers) - 1, int(share * len(makers)))]
    stmt = base.where(score >= _BAND, P.maker <= upto)
    if q.maker_words:
        stmt = stmt.where(P.maker.in_(q.makers))
    return stmt.order_by(P.maker, P.part_number).limit(fetch)


_FROM_PARTS = re.compile(r"\bFROM parts\b")
_MARK = re.compile(r"/\*pm-index:(\w+)\*/ ?")


def _execute(session: Reader, be: _Backend, stmt, index: str | None = None):
    """Run ``stmt``; on SQLite with ``INDEXED BY index`` on its main ``FROM parts``.

    SQLite plans without statistics unless the catalog was analysed, and may pick a rating index
    that reads a wide window where a narrow one, or the (maker, part_number) order, is what
    keeps the query short. SQLAlchemy does not render SQLite's INDEXED BY: the statement carries
    a marker comment (so its compiled form stays cached) that :func:`_put_index` turns into the
    clause just before the SQL reaches the driver.
    """
    if index and be.dialect == "sqlite":
        stmt = stmt.prefix_with(f"/*pm-index:{index}*/")
    return session.execute(stmt)


def _put_index(conn, cursor, statement, parameters, context, executemany):
    """``before_cursor_execute`` hook (SQLite): marker comment -> ``INDEXED BY``."""
    m = _MARK.search(statement) if "/*pm-index:" in statement else None
    if m:
        statement = _FROM_PARTS.sub(f"FROM parts INDEXED BY {m.group(1)}",
                                    _MARK.sub("", statement, count=1), count=1)
    return statement, parameters


def _process(rows, q: _Query, terms: list[_Term], char: object, total: float,
             tol: float | None, kind_piece: str | None,
             ) -> dict[int, tuple[float, list[str], list[str], str, str]]:
    """Python twin of the SQL score, with the reasons, for the rows the database returned."""
    from partsmatch.units import format_quantity as fq

    maker_words = list(q.maker_words)
    desc_words = q.desc_words
    out: dict[int, tuple[float, list[str], list[str], str, str]] = {}
    for row in rows:
        m = row._mapping
        reasons: list[str] = []
        how: list[str] = []
        parts_score = 0.0

        for t in terms:
            col = next((c for c in t.columns if m[c] is not None), t.columns[0])
            value = m[col]
            parts_score += 100.0 * t.weight / total * _rating_closeness(value, t)
            label = _LABELS[col]
            reasons.append(f"{label} {fq(value, t.unit)} (asked {fq(t.asked, t.unit)})")
        if terms:
            how.append("ratings")
        if isinstance(char, str):
            reasons.append(f"characteristic {m['characteristic']} (asked {char})")
            if "ratings" not in how:
                how.append("ratings")
        maker_hit = m["maker"] in q.makers
        for w in maker_words:
            if maker_hit:
                parts_score += 100.0 * 2.0 / total
        if maker_words and maker_hit:
            reasons.append(f"maker {m['maker']}")
            how.append("maker")
        desc = _ascii_lower(m["description"] or "")
        found = [w for w in desc_words if _ascii_lower(w) in desc]
        parts_score += sum(100.0 / total for _ in found)
        if found:
            reasons.append("description has " + ", ".join(repr(w) for w in found))
            how.append("description")
        if kind_piece and m["kind"] == kind_piece:
            parts_score += 100.0 / total
            reasons.append(f"kind {kind_piece}")
        if total <= 0:
            parts_score = 100.0
        if tol is not None:
            pen = _tolerance_penalty(m["tolerance_minus"], m["tolerance_plus"], tol)
            parts_score -= pen
            reasons.append(f"tolerance {_tol_text(m['tolerance_minus'], m['tolerance_plus'])} "
                           f"(asked ±{tol:g} %)")
        if not how:
            continue
        out[m["id"]] = (max(0.0, parts_score), reasons, how, m["maker"], m["part_number"])
    return out


def _tol_text(tm: float | None, tp: float | None) -> str:
    if tm is None or tp is None:
        return "not stated"
    return f"±{tm:g} %" if tm == tp else f"-{tm:g}/+{tp:g} %"
