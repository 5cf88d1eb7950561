"""Which reserve replaced which primary, and why: the substitutions of a results file.

The crew records a replacement on the row of the primary that could not be
sampled: ``replaced_by`` (the reserve's site id) and ``replacement_reason``
(why the primary was not sampled: "no access", "too shallow", "closed by
authority"...). :func:`substitutions` pairs every primary without a result with
the reserve that replaced it:

- *recorded*: the crew's ``replaced_by``, checked against the design (a reserve
  of the same stratum, sampled, named for one primary only);
- *inferred*: for primaries with no ``replaced_by``, the sampled reserves of the
  stratum not named elsewhere, in rank order (the rule the estimate uses), the
  reason taken from the primary's ``qualifier`` or ``notes`` when there is one.

A substitution is *in order* when every reserve of lower rank in its stratum was
sampled or reported as attempted (a reason in its qualifier or notes): reserves
are used in rank order, or the choice of sites is no longer random (the
estimate's flags say so as ``reserve_out_of_order``).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

__all__ = ["Substitution", "substitutions"]

_SAMPLED = ("value", "nd", "bad")


@dataclass(frozen=True)
class Substitution:
    """One primary site replaced (or not) by a reserve of its stratum.

    ``reserve`` is empty when no reserve was sampled in the primary's place;
    ``recorded`` says whether the crew wrote ``replaced_by`` (else inferred in
    rank order); ``reason`` is ``replacement_reason`` (or the primary's qualifier
    or notes); ``rows`` are the results-file rows (primary first).
    """

    stratum: str
    primary: str
    reserve: str
    reserve_rank: int
    reason: str
    recorded: bool
    in_order: bool
    rows: tuple[int, ...] = ()

    def as_dict(self) -> dict[str, Any]:
        return {"stratum": self.stratum, "primary": self.primary, "reserve": self.reserve,
                "reserve_rank": self.reserve_rank, "reason": self.reason, "recorded": self.recorded,
                "in_order": self.in_order, "rows": list(self.rows)}


def _cell(v: Any) -> str:
    s = "" if v is None else str(v).strip()
    return s[1:] if s.startswith("'") else s


def _rank(v: Any) -> int:
    try:
        return int(float(_cell(v)))
    except ValueError:
        return 0


def _extra(record: Any, key: str) -> str:
    return _cell(dict(getattr(record, "extra", ()) or ()).get(key, ""))


def _why(record: Any) -> str:
    """The reason the crew gave for a primary: replacement_reason, else its qualifier or notes."""
    if record is None:
        return ""
    return _extra(record, "replacement_reason") or _cell(record.qualifier) or _extra(record, "notes")


def substitutions(records: Sequence[Any], schedule_rows: Sequence[dict], strata: Sequence[str],
                  flag: Any) -> tuple[tuple[Substitution, ...], list[Any]]:
    """Every primary without a result, with the reserve that replaced it and why.

    Parameters
    ----------
    records : the results file's records (``results.Record``), with ``extra`` holding
        ``replaced_by``, ``replacement_reason`` and ``notes`` when the file has them.
    schedule_rows : the design's schedule rows (site_id, stratum, role, reserve_rank), in schedule order.
    strata : stratum names in frame order.
    flag : the ``Flag`` class to build flags with (``Flag(kind, message, rows, stratum, severity)``).

    Returns
    -------
    (substitutions, flags)
        Substitutions by stratum (frame order), primaries in schedule order; flags for
        replacements the design does not allow or that give no reason.
    """
    by_site = {r.site_id: r for r in records if r.status not in ("unknown_site", "duplicate")}
    design = {_cell(r.get("site_id")): r for r in schedule_rows}
    flags: list[Any] = []
    out: list[Substitution] = []
    named_by: dict[str, str] = {}
    for st in strata:
        rows = [r for r in schedule_rows if _cell(r.get("stratum")) == st]
        prim = [_cell(r.get("site_id")) for r in rows if _cell(r.get("role")) == "primary"]
        res = sorted((r for r in rows if _cell(r.get("role")) != "primary"), key=lambda r: _rank(r.get("reserve_rank")))
        res_ids = [_cell(r.get("site_id")) for r in res]
        rank = {_cell(r.get("site_id")): _rank(r.get("reserve_rank")) for r in res}

        def sampled(sid: str) -> bool:
            x = by_site.get(sid)
            return x is not None and x.status in _SAMPLED

        def attempted(sid: str) -> bool:
            x = by_site.get(sid)
            return x is not None and (x.attempted or bool(_why(x)))

        def in_order(sid: str) -> bool:
            return all(sampled(q) or attempted(q) for q in res_ids if rank[q] < rank.get(sid, 0))

        missing = [p for p in prim if not sampled(p)]
        pairs: dict[str, tuple[str, bool]] = {}
        for p in prim:
            x = by_site.get(p)
            want = _extra(x, "replaced_by") if x is not None else ""
            if not want:
                continue
            problem = None
            d = design.get(want)
            if d is None:
                problem = f"names {want!r}, which is not a site of the design"
            elif _cell(d.get("role")) == "primary":
                problem = f"names {want!r}, a primary site, not a reserve"
            elif _cell(d.get("stratum")) != st:
                problem = f"names {want!r}, a reserve of another stratum ({_cell(d.get('stratum'))})"
            elif want in named_by:
                problem = f"names {want!r}, already named for {named_by[want]}"
            elif sampled(p):
                problem = f"names {want!r} although {p} has a result"
            if problem:
                flags.append(flag("replacement_invalid", f"{st}: the row of {p} {problem}: a primary is replaced only "
                                  "by a reserve of its own stratum, each reserve once, and only when it has no result",
                                  (x.row,), st))
                continue
            named_by[want] = p
            pairs[p] = (want, True)
            if not sampled(want):
                flags.append(flag("replacement_not_sampled", f"{st}: {p} is recorded as replaced by {want}, which has "
                                  "no result", tuple(r.row for r in (x, by_site.get(want)) if r is not None), st))
        free = [q for q in res_ids if sampled(q) and q not in named_by]
        for p in missing:
            if p not in pairs and free:
                pairs[p] = (free.pop(0), False)
        for p in missing:
            x = by_site.get(p)
            reserve, recorded = pairs.get(p, ("", False))
            y = by_site.get(reserve) if reserve else None
            sub = Substitution(stratum=st, primary=p, reserve=reserve, reserve_rank=rank.get(reserve, 0),
                               reason=_why(x), recorded=recorded, in_order=(not reserve) or in_order(reserve),
                               rows=tuple(r.row for r in (x, y) if r is not None))
            out.append(sub)
        no_reason = [s for s in out if s.stratum == st and s.reserve and not s.reason]
        if no_reason:
            flags.append(flag(
                "replacement_reason_missing",
                f"{st}: no reason recorded for replacing " + ", ".join(f"{s.primary} by {s.reserve}" for s in no_reason)
                + ": write it in replacement_reason on the primary's row (a primary left out for a reason linked to "
                "the water, such as storms or low water, can bias the estimate)",
                tuple(s.rows[0] for s in no_reason if s.rows), st))
    used = [s for s in out if s.reserve]
    if used:
        flags.append(flag("replacements", f"{len(used)} primary site(s) replaced by reserves: " + "; ".join(
            f"{s.primary} by {s.reserve} ({s.reason or 'no reason given'})" for s in used),
            tuple(r for s in used for r in s.rows), "", "info"))
    return tuple(out), flags
