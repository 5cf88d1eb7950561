"""The field schedule as a table: ``schedule.csv``.

One row per site, primaries first (in the order the crew visits them: by date,
then route order), then reserves (by stratum in frame order, then reserve rank).
The columns are pinned (``DEVELOPERS.md``)::

    site_id, stratum, role, reserve_rank, visit_date, planned_time, day,
    day_inclusion_p, route_order, lat, lon, x, y, result, qualifier, sampled_at,
    sampler, notes, replaced_by, replacement_reason

- ``day`` is the 1-based number of the crew day: the rank of the visit's date
  among the dates that have visits (day 1 is the first day out). Reserves have
  ``visit_date``, ``planned_time``, ``day``, ``day_inclusion_p`` and
  ``route_order`` blank.
- ``day_inclusion_p`` is the probability that the design drew the visit's field
  day (``FieldDay.inclusion_p``, ``k_s / K_s`` of its temporal stratum; see
  ``randomizer.days``), written with up to 12 significant digits.
- ``planned_time`` is ISO 8601 in the survey's time zone with its UTC offset,
  to the second (``2027-06-14T09:32:00-05:00``).
- ``lat``/``lon`` are WGS 84 degrees with 6 decimals (about 0.1 m); ``x``/``y``
  are metres in the frame's CRS with 1 decimal.
- ``result, qualifier, sampled_at, sampler, notes`` are empty, for the crew;
  ``replaced_by`` and ``replacement_reason`` too: when a primary cannot be
  sampled, the crew writes on *its* row the site id of the reserve that replaced
  it (the next unused reserve of its stratum, in rank order) and why
  (:mod:`geosample.replacements` reads them).

The file is UTF-8 without a byte-order mark, with ``"\\n"`` line endings and
the :mod:`csv` module's minimal quoting, so identical designs give identical
bytes. A text cell that a spreadsheet would read as a formula (it starts with
``=``, ``+``, ``-``, ``@``, a tab or a carriage return) gets a leading
apostrophe (OWASP, "CSV Injection", common practice); numeric cells never do,
so a negative longitude stays a number. A line break inside a text cell is
written as ``"\\n"`` (the cell is then quoted). Readers of the file
(:mod:`geosample.results`, :func:`geosample.audit.verify`) drop that apostrophe.
"""
from __future__ import annotations

import csv
import datetime as dt
from collections.abc import Iterable
from pathlib import Path

from ..model import Design, Visit

__all__ = [
    "COLUMNS",
    "CREW_COLUMNS",
    "TEXT_COLUMNS",
    "FILE_NAME",
    "schedule_rows",
    "write_schedule",
    "ordered_visits",
    "day_numbers",
    "format_time",
    "format_probability",
    "neutralise_formula",
    "reserve_label",
]

FILE_NAME = "schedule.csv"

#: The crew fills these in (the last two on a primary's row when a reserve replaced it).
CREW_COLUMNS = ("result", "qualifier", "sampled_at", "sampler", "notes", "replaced_by", "replacement_reason")

#: Every column of ``schedule.csv``, in order.
COLUMNS = (
    "site_id", "stratum", "role", "reserve_rank", "visit_date", "planned_time", "day", "day_inclusion_p",
    "route_order", "lat", "lon", "x", "y",
) + CREW_COLUMNS

#: Columns holding user text (the only ones neutralised against formula injection).
TEXT_COLUMNS = ("site_id", "stratum", "role") + CREW_COLUMNS

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def neutralise_formula(text: str) -> str:
    """Prefix ``text`` with an apostrophe if a spreadsheet would run it as a formula.

    Examples
    --------
    >>> neutralise_formula("=HYPERLINK(1)")
    "'=HYPERLINK(1)"
    >>> neutralise_formula("North basin")
    'North basin'
    """
    return "'" + text if text.startswith(_FORMULA_START) else text


def reserve_label(code: str, rank: int) -> str:
    """The label a reserve goes by on the map and the sheets: stratum code and rank (``"NB-R2"``).

    Unique in the design (stratum codes are unique); empty for a primary (rank 0).

    Examples
    --------
    >>> reserve_label("NB", 2), reserve_label("NB", 0)
    ('NB-R2', '')
    """
    rank = int(rank)
    if rank <= 0:
        return ""
    return f"{code}-R{rank}" if code else f"R{rank}"


def format_time(t: dt.datetime | None) -> str:
    """ISO 8601 to the second with the UTC offset; empty for None.

    Examples
    --------
    >>> format_time(dt.datetime(2027, 6, 14, 9, 32, 5, 700, tzinfo=dt.timezone(dt.timedelta(hours=-5))))
    '2027-06-14T09:32:05-05:00'
    """
    if t is None:
        return ""
    if t.tzinfo is None or t.utcoffset() is None:
        raise ValueError(f"planned time {t!r} has no time zone; the schedule needs timezone-aware times")
    return t.isoformat(timespec="seconds")


def _stratum_order(design: Design) -> dict[str, int]:
    return {s.name: i for i, s in enumerate(design.frame.strata)}


def ordered_visits(design: Design) -> list[Visit]:
    """The visits in schedule order: primaries by date and route order, then reserves.

    Reserves follow by stratum (frame order) and ``reserve_rank``; ties are
    broken by ``site_id`` so the order never depends on the input order.
    """
    order = _stratum_order(design)
    big = len(order)
    primaries = [v for v in design.schedule.visits if v.role == "primary"]
    reserves = [v for v in design.schedule.visits if v.role != "primary"]
    primaries.sort(key=lambda v: (v.visit_date or dt.date.max,
                                  v.route_order if v.route_order is not None else 10**9,
                                  v.site_id))
    reserves.sort(key=lambda v: (order.get(v.stratum, big), v.stratum, v.reserve_rank, v.site_id))
    return primaries + reserves


def day_numbers(visits: Iterable[Visit]) -> dict[dt.date, int]:
    """Date -> 1-based crew-day number, counting only dates that have visits.

    Examples
    --------
    >>> vs = [Visit("A", "S", "primary", 0, 0, 0, 0, 0, visit_date=dt.date(2027, 6, d)) for d in (9, 2, 9)]
    >>> day_numbers(vs)
    {datetime.date(2027, 6, 2): 1, datetime.date(2027, 6, 9): 2}
    """
    dates = sorted({v.visit_date for v in visits if v.visit_date is not None and v.role == "primary"})
    return {d: i + 1 for i, d in enumerate(dates)}


def format_probability(p: float | None) -> str:
    """A probability with up to 12 significant digits; empty for None.

    Examples
    --------
    >>> format_probability(0.2), format_probability(1 / 3), format_probability(None)
    ('0.2', '0.333333333333', '')
    """
    return "" if p is None else format(float(p), ".12g")


def _row(v: Visit, days: dict[dt.date, int], inclusion: dict[int, float | None]) -> dict[str, str]:
    scheduled = v.role == "primary" and v.visit_date is not None
    row = {
        "site_id": v.site_id,
        "stratum": v.stratum,
        "role": v.role,
        "reserve_rank": str(int(v.reserve_rank)),
        "visit_date": v.visit_date.isoformat() if scheduled else "",
        "planned_time": format_time(v.planned_time) if scheduled else "",
        "day": str(days[v.visit_date]) if scheduled else "",
        "day_inclusion_p": format_probability(inclusion.get(v.day_index)) if scheduled else "",
        "route_order": str(int(v.route_order)) if scheduled and v.route_order is not None else "",
        "lat": f"{v.lat:.6f}",
        "lon": f"{v.lon:.6f}",
        "x": f"{v.x:.1f}",
        "y": f"{v.y:.1f}",
    }
    row.update({c: "" for c in CREW_COLUMNS})
    for c in TEXT_COLUMNS:
        row[c] = _one_line_ending(neutralise_formula(row[c]))
    return row


def _one_line_ending(text: str) -> str:
    # The csv module quotes a cell holding a character of the line terminator ("\n")
    # but not a lone "\r", which readers take for the end of the row.
    return text.replace("\r\n", "\n").replace("\r", "\n")


def schedule_rows(design: Design) -> list[dict[str, str]]:
    """The cells of ``schedule.csv``, exactly as written (text cells already neutralised).

    Parameters
    ----------
    design : Design

    Returns
    -------
    list of dict
        One dict per row, keys :data:`COLUMNS` in order, values strings.
    """
    visits = ordered_visits(design)
    days = day_numbers(visits)
    inclusion = {i: d.inclusion_p for i, d in enumerate(design.schedule.days)}
    return [_row(v, days, inclusion) for v in visits]


def write_schedule(design: Design, path: str | Path) -> Path:
    """Write ``schedule.csv`` (see the module docstring for the format).

    Parameters
    ----------
    design : Design
    path : str or Path
        The file to write (replaced if it exists).

    Returns
    -------
    Path
        ``path``.
    """
    path = Path(path)
    with open(path, "w", encoding="utf-8", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(COLUMNS), lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
        writer.writeheader()
        writer.writerows(schedule_rows(design))
    return path
