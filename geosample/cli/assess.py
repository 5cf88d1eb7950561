"""``geosample assess OUT RESULTS.csv``: the estimate, interval, decision and statement after the field work."""
from __future__ import annotations

from pathlib import Path

import click

from . import cli as group
from ._common import command, echo_json

ADJUST_CHOICES = ("holm", "bh", "bonferroni", "none")  # = geosample.stats.decisions.ADJUST_METHODS (checked in tests)


@command(group, "assess", short_help="Estimate, interval, decision and statement from the crew's results.")
@click.argument("out", metavar="OUT", type=click.Path(path_type=Path))
@click.argument("results", metavar="RESULTS.csv", type=click.Path(path_type=Path))
@click.option("--json", "as_json", is_flag=True, help="Print the figures as JSON.")
@click.option("--next-plan", "next_plan", type=click.Path(path_type=Path), default=None,
              help="Write a plan file for the next season: same settings, allocation from the observed sds, no seed.")
@click.option("--adjust", type=click.Choice(ADJUST_CHOICES), default="holm", show_default=True,
              help="Adjustment of the per-stratum p-values: Holm, Benjamini-Hochberg, Bonferroni or none.")
@click.option("--overwrite", is_flag=True, help="Replace an existing --next-plan file.")
@click.option("--lenient", is_flag=True,
              help="Flag and leave out unreadable results and unknown or duplicated site ids instead of stopping.")
def assess_command(out: Path, results: Path, as_json: bool, next_plan: Path | None, adjust: str, overwrite: bool,
                   lenient: bool) -> None:
    """Read RESULTS.csv (the design's schedule.csv with 'result', 'qualifier' and
    'sampled_at' filled in by the crew), check it against the design in OUT, and
    report the stratified mean with its interval from the plan's bound, the
    decision against the criterion in words a regulator can rely on, every
    stratum's comparison with the criterion, and the allocation for the next round.

    \b
    Results may be numbers, '<10' (below a detection limit), '>2419.6' (above
    the method's upper limit) or 'ND'; leave 'result' empty for a site not
    sampled and write why in 'qualifier' ("no access").

    Writes OUT/assessment.html (replaced on every run). Nothing else in OUT
    changes. Exit code 2 with the row numbers when the results file has problems.
    """
    from ..export.assessment import HTML_NAME, write_assessment, write_next_plan
    from ..results import read_design_folder, read_results
    from ..stats.assessment import assess

    if next_plan is not None:
        _check_next_plan(next_plan, out, results, overwrite)
    manifest, rows = read_design_folder(out)
    res = read_results(results, manifest, rows, strict=not lenient)
    a = assess(res, manifest, adjust=adjust, schedule_rows=rows)
    written = {}
    if next_plan is not None:
        written["next_plan"] = str(write_next_plan(a, manifest, next_plan, design_folder=out,
                                                   results_name=results.name, overwrite=overwrite))
    written["html"] = str(write_assessment(a, out, results_path=results))
    if as_json:
        data = a.as_dict()
        data["results"] = {"path": str(results), "encoding": res.encoding, "delimiter": res.delimiter,
                           "rows": len(res.records)}
        data["written"] = written
        echo_json(data)
        return
    click.echo(summary_text(a))
    click.echo("")
    click.echo(f"Wrote {Path(out) / HTML_NAME}" + (f" and {written['next_plan']}" if "next_plan" in written else ""))


def _check_next_plan(path: Path, out: Path, results: Path, overwrite: bool) -> None:
    """Refuse a --next-plan path that cannot be written, before any work (exit 2, the fix named)."""
    from ..errors import OutputExistsError, SettingError

    shown = str(path)
    if path.is_dir():
        raise SettingError("--next-plan", shown, "the path of a plan file to write, e.g. next-plan.toml",
                           fix=f"{shown!r} is a folder: give a file name in it, e.g. {str(path / 'next-plan.toml')!r}"
                               " (a folder is never replaced, with or without --overwrite)")
    parent = path.parent
    if not parent.is_dir():
        what = "is not a folder" if parent.exists() else "does not exist"
        raise SettingError("--next-plan", shown, "a file in an existing folder",
                           fix=f"the folder {str(parent)!r} {what}: create it first, or choose another place")
    target = path.resolve()
    if out.is_dir() and out.resolve() in target.parents:
        raise SettingError("--next-plan", shown, "a file outside the design folder",
                           fix=f"write it beside the design, not into {str(out)!r}: the design folder holds only "
                               "what 'geosample plan' wrote (and assessment.html)")
    if results.exists() and target == results.resolve():
        raise SettingError("--next-plan", shown, "a new file, not the results file being read",
                           fix="choose another file name, e.g. next-plan.toml")
    if path.exists() and not overwrite:
        raise OutputExistsError(f"--next-plan file {shown!r} exists already. Choose another file name, "
                                "or add --overwrite to replace it.")


def summary_text(a) -> str:
    """The plain-text summary printed on stdout."""
    d = a.as_dict()
    geo = a.statistic == "geomean"
    lines = [a.statement, "", a.decision_text]
    if a.range_void:
        lines.append(f"NOTE: the guarantee of the planned {a.planned_bound} bound does not hold (results outside the "
                     "declared range): no decision; the interval shown is approximate and no basis for a decision.")
    lines.append(f"Sequence: {a.sequential.note}.")
    if a.sd_between_days is not None or a.sd_within_day is not None:
        unit = " (log10)" if a.statistic == "geomean" else ""
        lines.append(f"Variance components{unit}: between field days sd {_f(a.sd_between_days)}, within a day sd "
                     f"{_f(a.sd_within_day)}.")
    lines += ["", f"Strata (all {len(a.strata)} compared with the criterion; p adjusted by {a.adjust}):"]
    head = ("stratum", "n", "planned", "mean", "sd (log10)" if geo else "sd", "interval", "p", "p adj", "comparison")
    body = []
    for s in d["strata"]:
        body.append((s["name"], str(s["n"]), _f(s["n_planned"]), _f(s["mean"]), _f(s["sd"]),
                     f"{_f(s['low'])} to {_f(s['high'])}", _f(s["p_value"], 3), _f(s["p_adjusted"], 3),
                     s["decision"] or "-"))
    widths = [max(len(r[i]) for r in [head, *body]) for i in range(len(head))]
    for r in [head, *body]:
        lines.append("  " + "  ".join(c.ljust(w) if i in (0, 8) else c.rjust(w) for i, (c, w) in
                                      enumerate(zip(r, widths))))
    if a.next_allocation is not None:
        r = a.next_allocation
        lines += ["", f"Next round ({r.method}, {r.bound} bound): " + ", ".join(
            f"{s} {n}" for s, n in zip(r.strata, r.n)) + f" (total {r.total})"]
    subs = d.get("substitutions") or []
    if subs:
        lines += ["", f"Substitutions ({len(subs)}):"]
        for s in subs:
            what = (f"replaced by {s['reserve']} (rank {s['reserve_rank']}, "
                    f"{'recorded' if s['recorded'] else 'inferred in rank order'}"
                    f"{'' if s['in_order'] else ', OUT OF RANK ORDER'})" if s["reserve"] else "no reserve sampled")
            lines.append(f"  - {s['stratum']}: {s['primary']} {what}; reason: {s['reason'] or 'not given'}")
    if a.flags:
        lines += ["", f"Flags ({len(a.flags)}):"]
        for f in a.flags:
            rows = f" [rows {', '.join(map(str, f.rows[:15]))}{' ...' if len(f.rows) > 15 else ''}]" if f.rows else ""
            lines.append(f"  - {f.kind}{rows}: {f.message}")
    if a.notes:
        lines += ["", "Notes:"] + [f"  - {n}" for n in a.notes]
    return "\n".join(lines)


def _f(v, digits: int = 4) -> str:
    if v is None:
        return "-"
    if isinstance(v, float):
        return f"{v:.{digits}g}"
    return str(v)
