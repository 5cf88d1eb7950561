"""Reading the results the field crew filled in (``schedule.csv`` with ``result``, ``qualifier``, ``sampled_at``).

:func:`read_results` reads the file, checks it against the design (the design
folder's ``manifest.json`` and ``schedule.csv``) and returns a frozen
:class:`Results`: one :class:`Record` per data row, the values each stratum
contributes to the estimate (in the order they were sampled), and
:class:`Flag` s with row numbers for everything a regulator should see.

Row numbers are the rows a spreadsheet shows: the header is row 1, the first
data row is row 2.

What is read
------------
- Encoding: UTF-8 (with or without BOM); otherwise cp1252 (Windows "ANSI"),
  then latin-1, with a note. Files with NUL bytes (UTF-16 "Unicode text", a
  workbook saved with a .csv name) are refused.
- Delimiter: comma, semicolon or tab, detected on the header line
  (:class:`csv.Sniffer`), or given by a spreadsheet's first line ``sep=;`` (read and
  skipped). With semicolons a decimal comma (``12,5``) is read as 12.5.
- Refused with the row or column named: two columns with the same name (which one
  holds the results cannot be known); a quote that is never closed where its cell
  ends (the rows after it would be read as one cell); results that are not finite
  or larger than :data:`MAX_RESULT` in absolute value; ``sampled_at`` outside the
  years :data:`SAMPLED_YEARS` (with ``strict=False`` these rows are flagged instead).
- Results: numbers; ``<10`` (below the detection limit: left-censored) and
  ``>2419.6`` (above the method's upper limit: right-censored), reported at the
  limit with the side in ``StratumResults.censored``; the assessment enters each as
  the interval of values it may have (``stats.assessment``), also written as qualifier ``<`` / ``>`` with the number in
  ``result``; ``ND`` (not detected, no limit: left out and reported); empty, ``NA``
  or ``-`` (not sampled). Anything else is unreadable.
- A site visited but not sampled: leave ``result`` empty and write the reason in
  ``qualifier`` or ``notes`` ("no access", "dry"): that marks it as *attempted*.

Checks
------
- Primary sites without a result are replaced by the reserves of the same
  stratum in ``reserve_rank`` order. The crew records each replacement on the
  primary's row (``replaced_by``: the reserve's site id; ``replacement_reason``);
  :mod:`geosample.replacements` lists every substitution with its reason. A reserve used while a lower-ranked reserve
  was neither used nor attempted is flagged (out of order); reserves sampled
  beyond the number of missing primaries are flagged and left out of the estimate.
- Site ids not in the design and duplicated site ids: with ``strict=True``
  (the default) a :class:`ResultsError` listing every such row, and so are
  unreadable results; with ``strict=False`` the rows are flagged and left out.
- Results outside the declared range (``size.range``, ``size.strata.<name>.range``):
  flagged; they void the range-based bounds (see ``stats.assessment.assess``).
- ``sampled_at`` more than :data:`TIME_TOLERANCE_H` hours from ``planned_time``, or on
  another date than ``visit_date`` (primaries), or outside the season (reserves).
- ``sampled_at`` that is not ISO 8601 (or a bare ``HH:MM`` on the visit date) -- such as a
  spreadsheet's rewriting ``6/2/27 8:06`` or a day number ``46541.34`` -- is not guessed at:
  the result is still used, and one flag lists the rows (their time cannot be checked).
"""
from __future__ import annotations

import csv
import datetime as dt
import io
import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable, Sequence

import numpy as np

from .errors import InputFileError, ResultsError
from .replacements import Substitution, substitutions

__all__ = [
    "TIME_TOLERANCE_H",
    "results_from_records",
    "Record",
    "Flag",
    "StratumResults",
    "Results",
    "read_design_folder",
    "read_results",
    "parse_result",
    "decode_text",
    "detect_delimiter",
]

#: Hours between ``planned_time`` and ``sampled_at`` beyond which a sample is flagged.
TIME_TOLERANCE_H = 2.0
#: Largest absolute result accepted: anything larger is a typing or unit mistake, and would overflow the sums.
MAX_RESULT = 1e15
#: Years a ``sampled_at`` may lie in (as a plan's season, ``geosample.limits.YEARS``).
SAMPLED_YEARS = (1900, 2199)

_MISSING = {"", "na", "n/a", "n.a.", "-", "\u2013", "\u2014", "not sampled", "none"}
_ND = {"nd", "n.d.", "n/d", "not detected", "bdl", "<dl", "<lod"}
_LEFT = ("<=", "\u2264", "<")
_RIGHT = (">=", "\u2265", ">")
_LEFT_QUAL = {"<", "<=", "\u2264", "u", "nd", "bdl", "<dl", "<lod", "below detection limit"}
_RIGHT_QUAL = {">", ">=", "\u2265", "tntc", "above upper limit"}
_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")


# --------------------------------------------------------------------------- records
@dataclass(frozen=True)
class Record:
    """One data row of the results file.

    ``status`` is ``value`` (a number, maybe censored), ``nd`` (not detected, no
    limit), ``missing`` (no result), ``bad`` (unreadable), ``unknown_site`` or
    ``duplicate``. ``used`` says whether the value enters the estimate.
    """

    row: int
    site_id: str
    stratum: str
    role: str
    reserve_rank: int
    raw: str
    value: float | None
    censored: str
    status: str
    used: bool
    qualifier: str
    sampled_at: dt.datetime | None
    attempted: bool
    extra: tuple[tuple[str, str], ...] = ()


@dataclass(frozen=True)
class Flag:
    """Something the crew, the program lead or the regulator should see, with the rows it concerns.

    ``severity``: ``info``, ``warning`` or ``voids`` (a guarantee no longer holds).
    """

    kind: str
    message: str
    rows: tuple[int, ...] = ()
    stratum: str = ""
    severity: str = "warning"

    def as_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "message": self.message, "rows": list(self.rows), "stratum": self.stratum,
                "severity": self.severity}


@dataclass(frozen=True)
class StratumResults:
    """The values one stratum contributes, in the order they were sampled (``sampled_at``, then row)."""

    name: str
    values: tuple[float, ...]
    rows: tuple[int, ...]
    censored: tuple[str, ...]
    n_primary_planned: int
    n_primary_sampled: int
    n_reserve_used: int

    @property
    def n(self) -> int:
        return len(self.values)


@dataclass(frozen=True)
class Results:
    """A results file read and checked against its design.

    Attributes
    ----------
    path : str
    encoding, delimiter : str
        As detected.
    columns : tuple of str
        The header, normalised (lower case), in file order.
    records : tuple of Record
    strata : tuple of StratumResults
        In frame order.
    order : tuple of (stratum, k)
        The used values in the order they were sampled across the frame:
        the k-th value (0-based) of that stratum.
    flags : tuple of Flag
    notes : tuple of str
    range_exceeded : tuple of str
        Strata whose results differ by more than the declared range (voids every range bound).
    outside_support : tuple of str
        Strata with results outside ``[lower, lower + range]`` (voids the betting bound).
    substitutions : tuple of Substitution
        Every primary without a result, with the reserve that replaced it (recorded by the crew in
        ``replaced_by``, or inferred in rank order) and why (:mod:`geosample.replacements`).
    """

    path: str
    encoding: str
    delimiter: str
    columns: tuple[str, ...]
    records: tuple[Record, ...]
    strata: tuple[StratumResults, ...]
    order: tuple[tuple[str, int], ...]
    flags: tuple[Flag, ...]
    notes: tuple[str, ...]
    range_exceeded: tuple[str, ...] = ()
    outside_support: tuple[str, ...] = ()
    substitutions: tuple[Substitution, ...] = ()

    def values(self, stratum: str) -> np.ndarray:
        for s in self.strata:
            if s.name == stratum:
                return np.asarray(s.values, dtype=float)
        raise KeyError(stratum)

    @property
    def n(self) -> int:
        return sum(s.n for s in self.strata)


# --------------------------------------------------------------------------- design folder
def read_design_folder(folder: str | Path) -> tuple[dict, list[dict]]:
    """The manifest and the schedule rows of a design folder written by ``geosample plan``."""
    from .audit import read_manifest

    folder = Path(folder)
    manifest = read_manifest(folder)
    sched = folder / "schedule.csv"
    if not sched.exists():
        raise InputFileError(f"{str(folder)!r} has no schedule.csv; assess needs the design's schedule to know "
                             "which sites are primary and which are reserves. Write the design again with "
                             "'geosample plan'.")
    with open(sched, newline="", encoding="utf-8-sig") as fh:
        rows = list(csv.DictReader(fh))
    return manifest, rows


# --------------------------------------------------------------------------- text
def decode_text(data: bytes, name: str = "results file") -> tuple[str, str, list[str]]:
    """Decode bytes as UTF-8 (BOM or not), else cp1252, else latin-1; returns (text, encoding, notes).

    Raises
    ------
    ResultsError
        Empty file, or NUL bytes (UTF-16 text or a binary file such as a workbook).
    """
    if not data.strip():
        raise ResultsError(f"{name} is empty (0 data rows). Fill in the 'result' column of schedule.csv and "
                           "give that file.")
    if b"\x00" in data[:65536]:
        kind = ("a spreadsheet workbook (.xlsx), not CSV text" if data[:4] == b"PK\x03\x04"
                else "UTF-16 or binary, not CSV text")
        raise ResultsError(f"{name} cannot be read: it contains NUL bytes, so it is {kind}. Save it from the "
                           "spreadsheet as 'CSV UTF-8 (comma delimited)'.")
    bom = data.startswith(b"\xef\xbb\xbf")
    if bom:
        data = data[3:]
    try:
        return data.decode("utf-8"), "utf-8-sig" if bom else "utf-8", []
    except UnicodeDecodeError as exc:
        where = exc.start
    for enc in ("cp1252", "latin-1"):
        try:
            text = data.decode(enc)
        except UnicodeDecodeError:
            continue
        line = data[:where].count(b"\n") + 1
        after = " after its UTF-8 byte order mark (it was saved again in another encoding)" if bom else ""
        return text, enc, [f"{name} is not UTF-8{after} (first non-UTF-8 byte on line {line}); it was read as {enc} "
                           "(Windows Western). Check accented names in the notes; save as 'CSV UTF-8' next time."]
    raise ResultsError(f"{name} cannot be decoded")  # pragma: no cover - latin-1 decodes every byte


def detect_delimiter(header: str) -> str:
    """Comma, semicolon or tab, from the header line (:class:`csv.Sniffer`, then a count)."""
    try:
        return csv.Sniffer().sniff(header, delimiters=",;\t").delimiter
    except csv.Error:
        counts = {d: header.count(d) for d in (",", ";", "\t")}
        best = max(counts, key=counts.get)
        return best if counts[best] else ","


def _sep_line(text: str) -> tuple[str, str, str]:
    """Drop a spreadsheet's delimiter hint (a first line ``sep=;``) and use it; else detect the delimiter.

    Returns ``(text without the hint, delimiter, note)``.
    """
    first, _, rest = text.partition("\n")
    m = re.fullmatch(r"\s*\ufeff?\s*sep=(.)\s*", first, flags=re.IGNORECASE)
    if m and m.group(1) in ",;\t|":
        shown = {"\t": "a tab", ";": "semicolons", ",": "commas", "|": "bars"}[m.group(1)]
        return rest, m.group(1), (f"its first line {first.strip()!r} (a spreadsheet's delimiter hint) was read: "
                                  f"columns are separated by {shown}; the header is the next line")
    lines = text.splitlines()
    return text, detect_delimiter(lines[0] if lines else ""), ""


def _read_table(text: str, delim: str, name: str) -> tuple[list[list[str]], str]:
    """The CSV rows, or a message for a quote that is never closed (it swallows the rows after it)."""
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delim)
    table: list[list[str]] = []
    start = 1
    try:
        for cells in reader:
            table.append(cells)
            first_line, start = start, reader.line_num + 1
            # a cell over several lines is fine (a note with a line break) unless a line in it looks like a row
            ncols = len(table[0])
            swallowed = [i for i, c in enumerate(cells) if ("\n" in c or "\r" in c) and any(
                line.count(delim) >= max(2, ncols // 2) for line in c.splitlines()[1:])]
            if swallowed:
                i = swallowed[0]
                header = table[0] if len(table) > 1 else []
                col = f"column {_norm_header(header[i])!r}" if i < len(header) else f"column {i + 1}"
                row = len(table)
                return table, (f"{name}: row {row} has a quote (\") in {col} that is never closed where the cell "
                               f"ends, so lines {first_line} to {reader.line_num} of the file were read as that one "
                               "cell. Remove the stray quote, or close it, in that row (a value typed as \"12 "
                               "is read as the start of a quoted text).")
    except csv.Error as exc:
        return table, f"{name} is not valid CSV (line {reader.line_num}: {exc}). Save it again from the spreadsheet."
    if not table:
        return table, f"{name} has no header row. Use the design's schedule.csv and keep its header row."
    return table, ""


def _check_header(header: list[str], name: str) -> None:
    """Refuse two columns with the same name: which one holds the results cannot be known."""
    seen: dict[str, int] = {}
    for i, h in enumerate(header):
        if not h:
            continue
        if h in seen:
            cols = [j + 1 for j, x in enumerate(header) if x == h]
            raise ResultsError(f"{name} has {len(cols)} columns named {h!r} (columns "
                               f"{', '.join(map(str, cols[:-1]))} and {cols[-1]}); which one to read cannot be "
                               "known. Keep one of them (rename or delete the others), then run again.")
        seen[h] = i


def _norm_header(h: str) -> str:
    return re.sub(r"\s+", "_", h.strip().lstrip("\ufeff").strip().lower())


def _cell(v: Any) -> str:
    s = "" if v is None else str(v)
    s = s.replace("\u00a0", " ").strip()
    return s[1:] if s.startswith("'") else s


# --------------------------------------------------------------------------- values
def parse_result(raw: str, qualifier: str = "", *, decimal_comma: bool = False) -> tuple[str, float | None, str]:
    """Read one result cell: returns ``(status, value, censored)``.

    ``status`` is ``value``, ``nd``, ``missing`` or ``bad``; ``censored`` is ``""``,
    ``"left"`` (``<10``) or ``"right"`` (``>2419.6``).

    Examples
    --------
    >>> parse_result("<10")
    ('value', 10.0, 'left')
    >>> parse_result("12,5", decimal_comma=True)
    ('value', 12.5, '')
    >>> parse_result("ND")
    ('nd', None, '')
    """
    s = _cell(raw)
    low = s.lower()
    q = _cell(qualifier).lower()
    if low in _MISSING:
        return "missing", None, ""
    if low in _ND:
        return "nd", None, ""
    censored = ""
    for pre in _LEFT:
        if s.startswith(pre):
            censored, s = "left", s[len(pre):].strip()
            break
    else:
        for pre in _RIGHT:
            if s.startswith(pre):
                censored, s = "right", s[len(pre):].strip()
                break
    if decimal_comma and "," in s and "." not in s:
        s = s.replace(",", ".")
    s = s.replace(" ", "")
    if not _NUMBER.match(s):
        return "bad", None, ""
    value = float(s)
    if not math.isfinite(value):
        return "bad", None, ""
    if not censored:
        if q in _LEFT_QUAL:
            censored = "left"
        elif q in _RIGHT_QUAL:
            censored = "right"
    return "value", value, censored


def _parse_time(text: str, tz: Any, visit_date: str) -> dt.datetime | None | str:
    s = _cell(text)
    if not s:
        return None
    try:
        if re.fullmatch(r"\d{1,2}:\d{2}(:\d{2})?", s) and visit_date:
            t = dt.datetime.fromisoformat(f"{visit_date}T{s.zfill(5) if len(s) == 4 else s}")
        else:
            t = dt.datetime.fromisoformat(s.replace(" ", "T", 1) if "T" not in s else s)
    except ValueError:
        return "bad"
    if not SAMPLED_YEARS[0] <= t.year <= SAMPLED_YEARS[1]:
        return "implausible"
    if t.tzinfo is None and tz is not None:
        t = t.replace(tzinfo=tz)
    return t


def _rows_text(rows: Iterable[int], limit: int = 12) -> str:
    rows = sorted(set(rows))
    shown = ", ".join(str(r) for r in rows[:limit])
    return f"row{'s' if len(rows) != 1 else ''} {shown}" + (f" and {len(rows) - limit} more" if len(rows) > limit
                                                             else "")


def _rank(v: Any) -> int:
    try:
        return int(float(_cell(v) or 0))
    except ValueError:
        return 0


# --------------------------------------------------------------------------- main
def read_results(path: str | Path, manifest: dict | str | Path, schedule_rows: Sequence[dict] | None = None, *,
                 strict: bool = True) -> Results:
    """Read a filled-in results file and check it against the design.

    Parameters
    ----------
    path : path
        The results CSV (``schedule.csv`` as the crew filled it, any column order).
    manifest : dict or path
        The design's manifest; or the design folder, whose manifest and
        ``schedule.csv`` are then read (``schedule_rows`` left None).
    schedule_rows : list of dict
        The design's schedule rows (``site_id, stratum, role, reserve_rank,
        visit_date, planned_time``...).
    strict : bool
        Unknown or duplicated site ids and unreadable results raise (default);
        with False they are flagged and left out.

    Raises
    ------
    InputFileError
        The file does not exist.
    ResultsError
        Empty file, no ``result`` or ``site_id`` column, no numeric result; with
        ``strict``, unreadable results and unknown or duplicated site ids (every
        row listed).
    """
    if schedule_rows is None:
        manifest, schedule_rows = read_design_folder(manifest)  # type: ignore[arg-type]
    assert isinstance(manifest, dict)
    path = Path(path)
    name = f"results file {str(path)!r}"
    if not path.exists():
        raise InputFileError(f"{name} does not exist. Give the schedule.csv the crew filled in.")
    if path.is_dir():
        raise InputFileError(f"{name} is a folder, not a file. Give the path of the CSV file the crew filled in "
                             "(the design's schedule.csv with the 'result' column completed).")
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InputFileError(f"{name} cannot be read ({exc.strerror or exc}). Check that the file is readable by "
                             "you and not locked by another program.") from None
    text, encoding, notes = decode_text(data, name)
    text, delim, sep_note = _sep_line(text)
    if sep_note:
        notes.append(f"{name}: {sep_note}")
    table, problem = _read_table(text, delim, name)
    if problem:
        raise ResultsError(problem)
    header = [_norm_header(h) for h in table[0]]
    _check_header(header, name)
    if "result" not in header or "site_id" not in header:
        missing = [c for c in ("site_id", "result") if c not in header]
        raise ResultsError(
            f"{name} has no {' or '.join(repr(m) for m in missing)} column (row 1 has: "
            f"{', '.join(repr(h) for h in header) or 'nothing'}; delimiter read as {delim!r}). Use the design's "
            "schedule.csv and fill in its 'result' column; keep its header row.")
    if delim != ",":
        notes.append(f"{name} uses {'semicolons' if delim == ';' else 'tabs'} between columns"
                     + ("; decimal commas (12,5) are read as decimal points" if delim == ";" else ""))
    col = {h: i for i, h in reversed(list(enumerate(header)))}
    settings = manifest.get("settings", {})
    statistic = settings.get("survey", {}).get("statistic", "mean")
    tz = _zone(settings.get("survey", {}).get("timezone"))
    design = {_cell(r.get("site_id")): r for r in schedule_rows}
    # columns the crew added (and their sampler / notes) are kept with each record; the design's own columns
    # come from the design
    design_cols = {"site_id", "result", "qualifier", "sampled_at", "stratum", "role", "reserve_rank", "visit_date",
                   "planned_time", "day", "day_inclusion_p", "route_order", "lat", "lon", "x", "y"}
    extra_idx = [(h, i) for i, h in enumerate(header) if h not in design_cols and col.get(h) == i]

    def get(cells: list[str], key: str) -> str:
        i = col.get(key)
        return _cell(cells[i]) if i is not None and i < len(cells) else ""

    records: list[Record] = []
    flags: list[Flag] = []
    bad_rows: list[tuple[int, str]] = []
    unknown: list[tuple[int, str]] = []
    seen: dict[str, int] = {}
    dups: list[tuple[int, str, int]] = []
    nonpos: list[tuple[int, str]] = []
    bad_time: list[int] = []
    far_time: list[tuple[int, str]] = []
    huge: list[tuple[int, str]] = []
    mismatch: list[int] = []
    for k, cells in enumerate(table[1:]):
        row = k + 2
        if not any(_cell(c) for c in cells):
            continue
        sid = get(cells, "site_id")
        raw = get(cells, "result")
        qual = get(cells, "qualifier")
        status, value, cens = parse_result(raw, qual, decimal_comma=(delim == ";"))
        d = design.get(sid)
        if status == "value" and statistic == "geomean" and value is not None and value <= 0:
            nonpos.append((row, raw))
            status, value = "bad", None
        if status == "value" and value is not None and abs(value) > MAX_RESULT:
            huge.append((row, raw))
            status, value = "bad", None
        if status == "bad" and not (raw.lower() in _ND):
            bad_rows.append((row, raw))
        if d is None:
            unknown.append((row, sid))
            status_final = "unknown_site"
        elif sid in seen:
            dups.append((row, sid, seen[sid]))
            status_final = "duplicate"
        else:
            seen[sid] = row
            status_final = status
        when = _parse_time(get(cells, "sampled_at"), tz, _cell((d or {}).get("visit_date")))
        if when == "bad":
            bad_time.append(row)
            when = None
        elif when == "implausible":
            far_time.append((row, get(cells, "sampled_at")))
            when = None
        if d is not None and "stratum" in col and get(cells, "stratum") and get(cells, "stratum") != _cell(
                d.get("stratum")):
            mismatch.append(row)
        attempted = status == "missing" and bool(qual or get(cells, "notes") or get(cells, "sampled_at"))
        records.append(Record(
            row=row, site_id=sid, stratum=_cell((d or {}).get("stratum")), role=_cell((d or {}).get("role")),
            reserve_rank=_rank((d or {}).get("reserve_rank")), raw=raw, value=value, censored=cens,
            status=status_final, used=False, qualifier=qual, sampled_at=when, attempted=attempted,
            extra=tuple((h, cells[i].strip() if i < len(cells) else "") for h, i in extra_idx),
        ))
    if not records:
        raise ResultsError(f"{name} has a header but no data rows. Fill in the 'result' column of the design's "
                           "schedule.csv and give that file.")
    problems = []
    if bad_rows:
        problems.append("unreadable results at " + "; ".join(f"row {r}: {v!r}" for r, v in bad_rows[:12])
                        + (f" and {len(bad_rows) - 12} more" if len(bad_rows) > 12 else "")
                        + (" (log10 needs values above 0 for a geometric mean: write a value at or below the "
                           "detection limit as '<1')" if nonpos else "")
                        + (f" (a result larger than {MAX_RESULT:g} in absolute value is a typing or unit mistake: "
                           "write the laboratory's number in the units of the plan)" if huge else "")
                        + (" (with commas between columns a decimal comma cannot be told from a column break: "
                           "use a decimal point)" if delim == "," else ""))
    if unknown:
        problems.append("site ids not in the design at " + "; ".join(f"row {r}: {s!r}" for r, s in unknown[:12])
                        + (f" and {len(unknown) - 12} more" if len(unknown) > 12 else ""))
    if dups:
        problems.append("duplicated site ids at " + "; ".join(f"row {r}: {s!r} (first at row {f})"
                                                             for r, s, f in dups[:12]))
    if far_time:
        problems.append(f"sampled_at outside the years {SAMPLED_YEARS[0]} to {SAMPLED_YEARS[1]} at "
                        + "; ".join(f"row {r}: {v!r}" for r, v in far_time[:12])
                        + (f" and {len(far_time) - 12} more" if len(far_time) > 12 else "")
                        + " (write the date and time the sample was taken)")
    if problems and strict:
        raise ResultsError(f"{name} has problems: " + ". ".join(problems) + ". Correct those rows (results are "
                           "numbers, '<limit', '>limit' or 'ND'; site ids as in the design's schedule.csv), or "
                           "run with --lenient to leave them out and have them flagged.")
    if bad_rows:
        flags.append(Flag("unreadable_result", f"results that could not be read were left out ({problems[0]})",
                          tuple(r for r, _ in bad_rows)))
    if unknown:
        flags.append(Flag("unknown_site", "site ids not in the design were left out: "
                          + ", ".join(repr(s) for _, s in unknown[:12]), tuple(r for r, _ in unknown)))
    if dups:
        flags.append(Flag("duplicate_site", "duplicated site ids: only the first row of each counts",
                          tuple(r for r, _, _ in dups)))
    if far_time:
        flags.append(Flag("sampled_at_implausible", f"sampled_at outside the years {SAMPLED_YEARS[0]} to "
                          f"{SAMPLED_YEARS[1]}: these samples are used without the check of their time against the "
                          "plan", tuple(r for r, _ in far_time)))
    if bad_time:
        flags.append(Flag("sampled_at_unreadable", "sampled_at could not be read (write ISO 8601, e.g. "
                          "2027-06-03T09:40-05:00 or 2027-06-03 09:40 in local time; a spreadsheet may have "
                          "rewritten the dates, as 6/2/27 8:06 or day numbers like 46541.34: format that column as "
                          "text). These samples are used, without the check of their time against the plan",
                          tuple(bad_time), severity="info"))
    if mismatch:
        flags.append(Flag("stratum_changed", "the stratum column differs from the design's; the design's stratum "
                          "is used", tuple(mismatch)))
    nd = [r.row for r in records if r.status == "nd"]
    if nd:
        flags.append(Flag("not_detected", "'ND' without a detection limit: left out of the estimate, which can "
                          "only raise it. Write the limit, e.g. '<1', to use these results", tuple(nd)))

    by_site = {r.site_id: r for r in records if r.status not in ("unknown_site", "duplicate")}
    used_rows, sflags, strata = _replacement(manifest, schedule_rows, by_site)
    flags += sflags
    subs, subflags = substitutions(records, schedule_rows, strata, Flag)
    flags += subflags
    records = [r if r.row not in used_rows else _with_used(r) for r in records]
    usable = [r for r in records if r.used]
    if not usable:
        counts = {}
        for r in records:
            counts[r.status] = counts.get(r.status, 0) + 1
        what = ", ".join(f"{v} {k.replace('_', ' ')}" for k, v in sorted(counts.items()))
        raise ResultsError(f"{name} has no numeric result the estimate can use: of {len(records)} data rows "
                           f"(rows 2-{records[-1].row}) there are {what}. Fill in the 'result' column with the "
                           "laboratory's numbers.")
    flags += _time_flags(usable, schedule_rows, settings, tz)
    strata_res, order, rng_ex, outside, rflags = _per_stratum(manifest, strata, usable, statistic)
    flags += rflags
    no_time = [r.row for r in usable if r.sampled_at is None]
    if no_time:
        notes.append(f"{len(no_time)} used result(s) have no sampled_at; they are taken in row order for the "
                     "sequence of samples")
    return Results(
        path=str(path), encoding=encoding, delimiter=delim, columns=tuple(header), records=tuple(records),
        strata=strata_res, order=order, flags=tuple(flags), notes=tuple(notes), range_exceeded=rng_ex,
        outside_support=outside, substitutions=subs,
    )


def _zone(name: str | None) -> Any:
    if not name:
        return None
    from zoneinfo import ZoneInfo

    try:
        return ZoneInfo(name)
    except Exception:
        return None


def _with_used(r: Record) -> Record:
    from dataclasses import replace

    return replace(r, used=True)


def _replacement(manifest: dict, schedule_rows: Sequence[dict], by_site: dict[str, Record]
                 ) -> tuple[set[int], list[Flag], list[str]]:
    """Which rows enter the estimate: every primary with a value, and reserves in rank order for missing primaries."""
    flags: list[Flag] = []
    used: set[int] = set()
    strata_names = [s["name"] for s in (manifest.get("frame") or {}).get("strata", [])]
    sites: dict[str, dict[str, list[dict]]] = {}
    for r in schedule_rows:
        st = _cell(r.get("stratum"))
        sites.setdefault(st, {"primary": [], "reserve": []})
        sites[st]["primary" if _cell(r.get("role")) == "primary" else "reserve"].append(r)
    for st in sites:
        if st not in strata_names:
            strata_names.append(st)
    for st in strata_names:
        group = sites.get(st, {"primary": [], "reserve": []})
        prim = group["primary"]
        res = sorted(group["reserve"], key=lambda r: _rank(r.get("reserve_rank")))

        def rec(r: dict) -> Record | None:
            return by_site.get(_cell(r.get("site_id")))

        def sampled(r: dict) -> bool:
            x = rec(r)
            return x is not None and x.status in ("value", "nd", "bad")

        missing = [p for p in prim if not sampled(p)]
        for p in prim:
            x = rec(p)
            if x is not None and x.status == "value":
                used.add(x.row)
        taken = [r for r in res if sampled(r)]
        # out of order: a reserve sampled while a lower rank was neither sampled nor attempted
        for i, r in enumerate(res):
            if not sampled(r):
                continue
            skipped = [q for q in res[:i] if not sampled(q) and not (rec(q) is not None and rec(q).attempted)]
            if skipped:
                x = rec(r)
                flags.append(Flag(
                    "reserve_out_of_order",
                    f"{st}: reserve {_cell(r.get('site_id'))} (rank {_rank(r.get('reserve_rank'))}) was sampled while "
                    f"reserve{'s' if len(skipped) > 1 else ''} "
                    f"{', '.join(_cell(q.get('site_id')) for q in skipped)} of lower rank {'were' if len(skipped) > 1 else 'was'} "
                    "neither sampled nor reported as attempted: reserves must be used in reserve_rank order, or the "
                    "choice of sites is no longer random. Record why a skipped reserve could not be sampled in its "
                    "qualifier", (x.row,) + tuple(rec(q).row for q in skipped if rec(q) is not None), st))
        replacements = taken[: len(missing)]
        extra = taken[len(missing):]
        for r in replacements:
            x = rec(r)
            if x is not None and x.status == "value":
                used.add(x.row)
        if extra:
            rows = tuple(rec(r).row for r in extra if rec(r) is not None)
            flags.append(Flag(
                "reserve_extra",
                f"{st}: {len(extra)} reserve result(s) although "
                + ("every primary site has a result" if not missing else
                   f"only {len(missing)} primary site(s) lacked one")
                + ": left out of the estimate (a reserve replaces a primary site that could not be sampled)",
                rows, st))
        if len(taken) < len(missing):
            short = missing[len(taken):]
            rows = tuple(rec(p).row for p in short if rec(p) is not None)
            ids = ", ".join(_cell(p.get("site_id")) for p in short)
            flags.append(Flag(
                "primary_not_replaced",
                f"{st}: {len(short)} primary site(s) without a result and no reserve sampled in their place ({ids}); "
                "the stratum has fewer samples than planned, and if the sites were missed for a reason linked to "
                "the water quality (storms, low water) the estimate can be biased", rows, st))
    return used, flags, strata_names


def _time_flags(usable: list[Record], schedule_rows: Sequence[dict], settings: dict, tz: Any) -> list[Flag]:
    design = {_cell(r.get("site_id")): r for r in schedule_rows}
    off: list[tuple[int, str]] = []
    time = settings.get("time", {})
    start, end = _date(time.get("start")), _date(time.get("end"))
    for r in usable:
        if r.sampled_at is None:
            continue
        d = design.get(r.site_id, {})
        planned = _cell(d.get("planned_time"))
        if r.role == "primary" and planned:
            try:
                p = dt.datetime.fromisoformat(planned)
            except ValueError:
                continue
            t = r.sampled_at if r.sampled_at.tzinfo else r.sampled_at.replace(tzinfo=p.tzinfo)
            local = t.astimezone(p.tzinfo)
            hours = abs((t - p).total_seconds()) / 3600.0
            visit = _cell(d.get("visit_date")) or p.date().isoformat()
            if local.date().isoformat() != visit:
                off.append((r.row, f"{r.site_id} sampled on {local.date().isoformat()}, planned for {visit}"))
            elif hours > TIME_TOLERANCE_H:
                off.append((r.row, f"{r.site_id} sampled {hours:.1f} h from its planned time {p.strftime('%H:%M')}"))
        elif start and end:
            day = (r.sampled_at.astimezone(tz) if (tz and r.sampled_at.tzinfo) else r.sampled_at).date()
            if not (start <= day <= end):
                off.append((r.row, f"{r.site_id} sampled on {day.isoformat()}, outside the season "
                                   f"{start.isoformat()} to {end.isoformat()}"))
    if not off:
        return []
    return [Flag("time_off_plan",
                 f"{len(off)} sample(s) taken far from the planned time (another day, or more than "
                 f"{TIME_TOLERANCE_H:g} h off): " + "; ".join(m for _, m in off[:8])
                 + (f"; and {len(off) - 8} more" if len(off) > 8 else "")
                 + ". Random times are part of the design: time of day changes indicator-bacteria counts",
                 tuple(r for r, _ in off))]


def _date(v: Any) -> dt.date | None:
    if isinstance(v, dt.date):
        return v
    try:
        return dt.date.fromisoformat(str(v)) if v else None
    except ValueError:
        return None


def _per_stratum(manifest: dict, names: list[str], usable: list[Record], statistic: str):
    from .stats.intervals import declared_support, to_analysis_scale

    settings = manifest.get("settings", {})
    alloc = manifest.get("allocation") or {}
    planned = dict(zip(alloc.get("strata", ()), alloc.get("n", ())))
    far = dt.datetime.max.replace(tzinfo=dt.timezone.utc)

    def key(r: Record):
        t = r.sampled_at
        if t is not None and t.tzinfo is None:
            t = t.replace(tzinfo=dt.timezone.utc)
        return (t or far, r.row)

    ordered = sorted(usable, key=key)
    flags: list[Flag] = []
    out: list[StratumResults] = []
    order: list[tuple[str, int]] = []
    counters: dict[str, int] = {}
    exceeded, outside = [], []
    for r in ordered:
        k = counters.get(r.stratum, 0)
        order.append((r.stratum, k))
        counters[r.stratum] = k + 1
    for st in names:
        recs = [r for r in ordered if r.stratum == st]
        vals = np.array([r.value for r in recs], float)
        lower, L = declared_support(settings, st)
        if L is not None and vals.size:
            y = to_analysis_scale(vals, statistic)
            unit = " (log10 units)" if statistic == "geomean" else ""
            if y.max() - y.min() > L:
                rows = (recs[int(np.argmin(y))].row, recs[int(np.argmax(y))].row)
                exceeded.append(st)
                flags.append(Flag(
                    "outside_range",
                    f"{st}: results differ by {y.max() - y.min():.4g}{unit}, more than the declared range "
                    f"{L:g}: the range-based bounds (chebyshev, cantelli, hoeffding, bernstein, betting) do not hold; "
                    "the assessment makes no decision and shows an approximate interval only",
                    rows, st, "voids"))
            bad = [r.row for r, v in zip(recs, y) if v < lower or v > lower + L]
            if bad and st not in exceeded:
                outside.append(st)
                flags.append(Flag(
                    "outside_support",
                    f"{st}: results outside [{lower:g}, {lower + L:g}]{unit}, the declared range taken from "
                    f"{lower:g}: the betting bound, which rescales the results to [0, 1] by that range, does not "
                    "hold (the other range bounds need only the range's length)", tuple(bad), st,
                    "voids" if settings.get("size", {}).get("bound") == "betting" else "warning"))
            elif bad:
                outside.append(st)
        left = [r.row for r in recs if r.censored == "left"]
        right = [r.row for r in recs if r.censored == "right"]
        if left:
            flags.append(Flag("censored_left", f"{st}: {len(left)} result(s) below the detection limit ('<'): each "
                              "enters the bounds as the interval from the range's lower end to the limit", tuple(left), st, "info"))
        if right:
            flags.append(Flag("censored_right", f"{st}: {len(right)} result(s) above the method's upper limit ('>'): "
                              "each enters the bounds as the interval from the limit to the range's upper end", tuple(right), st, "info"))
        out.append(StratumResults(
            name=st, values=tuple(float(v) for v in vals), rows=tuple(r.row for r in recs),
            censored=tuple(r.censored for r in recs), n_primary_planned=int(planned.get(st, 0) or 0),
            n_primary_sampled=sum(1 for r in recs if r.role == "primary"),
            n_reserve_used=sum(1 for r in recs if r.role == "reserve"),
        ))
    return tuple(out), tuple(order), tuple(exceeded), tuple(outside), flags


def results_from_records(records: Sequence[Record], manifest: dict, *, source: str = "simulated results") -> Results:
    """Results from records already made (no file): the per-stratum values, order and range checks of
    :func:`read_results`, for records that are all used, clean values (``geosample simulate``).

    Each record must have ``status`` ``"value"`` and ``used`` True; the stratum of each is the design's.
    """
    names = [s["name"] for s in (manifest.get("frame") or {}).get("strata", [])]
    statistic = manifest.get("settings", {}).get("survey", {}).get("statistic", "mean")
    usable = [r for r in records if r.used]
    strata_res, order, rng_ex, outside, flags = _per_stratum(manifest, names, usable, statistic)
    return Results(path=source, encoding="utf-8", delimiter=",", columns=("site_id", "result"),
                   records=tuple(records), strata=strata_res, order=order, flags=tuple(flags), notes=(),
                   range_exceeded=rng_ex, outside_support=outside)
