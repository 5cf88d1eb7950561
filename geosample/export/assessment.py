"""Files ``geosample assess`` writes: ``assessment.html`` in the design folder, and the next season's plan.

``assessment.html`` is derived from the design folder and one results file; it
is not part of the field package (``manifest.json`` does not list it, so
``geosample verify`` ignores it). Each run replaces it, atomically (written to a
temporary file in the same folder, then renamed), and the page names the results
file and its SHA-256. Keep copies under other names if several are wanted.

The next plan (``--next-plan FILE``) is TOML written by :func:`toml_dumps`, a small
emitter for the subset plans use (tables, strings, numbers, booleans, dates,
lists): the standard library reads TOML (:mod:`tomllib`) but does not write it.
"""
from __future__ import annotations

import copy
import datetime as dt
import hashlib
import math
import os
import re
import tempfile
from pathlib import Path
from typing import Any

from ..errors import OutputExistsError

__all__ = ["HTML_NAME", "toml_dumps", "next_plan_settings", "write_next_plan", "render_assessment",
           "write_assessment", "atomic_write_text"]

HTML_NAME = "assessment.html"

_BARE = re.compile(r"[A-Za-z0-9_-]+")
_ESCAPES = {"\\": "\\\\", '"': '\\"', "\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f", "\r": "\\r"}


# --------------------------------------------------------------------------- TOML
def _toml_string(s: str) -> str:
    out = []
    for ch in s:
        if ch in _ESCAPES:
            out.append(_ESCAPES[ch])
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04X}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _toml_key(k: str) -> str:
    k = str(k)
    return k if _BARE.fullmatch(k) else _toml_string(k)


def _toml_value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        r = repr(v)
        return r if any(c in r for c in ".en") else r + ".0"
    if isinstance(v, str):
        return _toml_string(v)
    if isinstance(v, (dt.datetime, dt.date, dt.time)):
        return v.isoformat()
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v if x is not None) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_toml_key(k)} = {_toml_value(x)}" for k, x in v.items() if x is not None) + "}"
    if hasattr(v, "item"):  # numpy scalar
        return _toml_value(v.item())
    raise TypeError(f"cannot write {type(v).__name__} to TOML")


def toml_dumps(data: dict, *, header: str = "") -> str:
    """TOML text for ``data`` (nested dicts become ``[tables]``; None values are left out).

    ``header`` lines are written first as comments.

    Examples
    --------
    >>> print(toml_dumps({"survey": {"title": 'Say "hi"'}, "size": {"strata": {"North basin": {"sd": 1.5}}}}))
    [survey]
    title = "Say \\"hi\\""
    <BLANKLINE>
    [size.strata."North basin"]
    sd = 1.5
    <BLANKLINE>
    """
    lines: list[str] = [f"# {h}".rstrip() for h in header.splitlines()] if header else []
    if lines:
        lines.append("")

    def table(path: list[str], d: dict) -> None:
        scalars = [(k, v) for k, v in d.items() if v is not None and not isinstance(v, dict)]
        subs = [(k, v) for k, v in d.items() if isinstance(v, dict)]
        if path and (scalars or not subs):
            lines.append("[" + ".".join(_toml_key(p) for p in path) + "]")
        for k, v in scalars:
            lines.append(f"{_toml_key(k)} = {_toml_value(v)}")
        if path and (scalars or not subs):
            lines.append("")
        for k, v in subs:
            table(path + [str(k)], v)

    top = [(k, v) for k, v in data.items() if v is not None and not isinstance(v, dict)]
    for k, v in top:
        lines.append(f"{_toml_key(k)} = {_toml_value(v)}")
    if top:
        lines.append("")
    table([], {k: v for k, v in data.items() if isinstance(v, dict)})
    return "\n".join(lines).rstrip("\n") + "\n"


# --------------------------------------------------------------------------- next plan
def _shift_year(d: dt.date, years: int = 1) -> dt.date:
    try:
        return d.replace(year=d.year + years)
    except ValueError:  # 29 February
        return d.replace(year=d.year + years, day=28)


def _as_date(v: Any) -> Any:
    if isinstance(v, str):
        try:
            return dt.date.fromisoformat(v)
        except ValueError:
            return v
    return v


def _sig(x: float, digits: int = 4) -> float:
    if x == 0 or not math.isfinite(x):
        return float(x)
    return float(f"{x:.{digits}g}")


def _strip(d: Any) -> Any:
    if isinstance(d, dict):
        return {k: _strip(v) for k, v in d.items() if v is not None and not (isinstance(v, dict) and not v
                                                                              and k != "strata")}
    if isinstance(d, list):
        return [_strip(v) for v in d]
    return d


def next_plan_settings(assessment: Any, manifest: dict, *, plan_path: str | Path, design_folder: str | Path) -> dict:
    """The settings of the next season's plan: the same plan, new allocation hints, no seed.

    - ``[size]``: ``allocation`` becomes the suggested method (``neyman`` or
      ``optimal``); each ``[size.strata.<name>]`` gets the observed ``sd`` (log10
      units for a geometric mean) and the ``cost`` used, keeping its ``range``;
      ``tolerance`` or ``n`` stay as planned, so the plan sizes the total again; for
      chebyshev and cantelli (whose sizing would take the sds as known) ``n`` is set to
      the total found with the declared ranges alone. ``sd_between_days`` and
      ``sd_within_day`` become the variance components observed (when the results show
      both: some field day with two results of a stratum, at least two days).
    - ``[draw]``: no ``seed`` or ``seed_text``, so a fresh seed is drawn and recorded.
    - ``[time]``: ``start``, ``end`` and ``skip`` move one year on (check them).
    - ``[area]``: paths are rewritten relative to the new plan file.
    """
    settings = copy.deepcopy(manifest.get("settings", {}))
    try:
        from ..plan import SCHEMA, STRATUM_KEYS
    except ImportError:  # pragma: no cover
        SCHEMA, STRATUM_KEYS = None, None
    if SCHEMA is not None:
        settings = {sec: {k: v for k, v in (settings.get(sec) or {}).items() if k in keys}
                    for sec, keys in SCHEMA.items() if sec in settings}
    draw = settings.setdefault("draw", {})
    for k in ("seed", "seed_text", "seed_used", "seed_source"):
        draw.pop(k, None)
    time = settings.setdefault("time", {})
    for k in ("start", "end"):
        if k in time:
            d = _as_date(time[k])
            time[k] = _shift_year(d) if isinstance(d, dt.date) else d
    if isinstance(time.get("skip"), list):
        time["skip"] = [_shift_year(d) if isinstance(d, dt.date) else d for d in map(_as_date, time["skip"])]
    size = settings.setdefault("size", {})
    realloc = assessment.next_allocation
    if realloc is not None:
        size["allocation"] = realloc.method
        per = {str(k): dict(v or {}) for k, v in (size.get("strata") or {}).items()}
        for i, name in enumerate(realloc.strata):
            t = per.setdefault(name, {})
            t["sd"] = _sig(realloc.sd[i]) if realloc.sd[i] > 0 else t.get("sd")
            if realloc.cost is not None:
                t["cost"] = _sig(realloc.cost[i])
            if STRATUM_KEYS is not None:
                per[name] = {k: v for k, v in t.items() if k in STRATUM_KEYS and v is not None}
        size["strata"] = per
        if realloc.bound in ("chebyshev", "cantelli") and size.get("tolerance"):
            # the plan's sizing would take these sds as known for chebyshev/cantelli; fix the total found with
            # the declared ranges alone, so the guarantee does not rest on last season's sds
            size["n"] = int(realloc.total)
    # the variance components observed this season (between-day and within-day sds), which the plan sizes field
    # days and visits per day from; they go together, and not both 0
    sb, sw = getattr(assessment, "sd_between_days", None), getattr(assessment, "sd_within_day", None)
    size_keys = SCHEMA.get("size", {}) if SCHEMA is not None else {}
    if (sb is not None and sw is not None and (sb > 0 or sw > 0) and "sd_between_days" in size_keys
            and "sd_within_day" in size_keys):
        size["sd_between_days"] = _sig(sb)
        size["sd_within_day"] = _sig(sw)
    # area paths relative to the new plan
    area = settings.get("area", {})
    inputs = manifest.get("inputs", {}) or {}
    folder = Path(design_folder).resolve()
    new_dir = Path(plan_path).resolve().parent

    def moved(label: str, old: Any) -> Any:
        info = inputs.get(label)
        if not info or not info.get("path"):
            return old
        target = (folder / info["path"]).resolve()
        try:
            return Path(os.path.relpath(target, new_dir)).as_posix()
        except ValueError:
            return target.as_posix()

    if "water" in area:
        area["water"] = moved("water", area["water"])
    if isinstance(area.get("exclude"), list):
        area["exclude"] = [moved(f"exclude[{i}]", p) for i, p in enumerate(area["exclude"])]
    if area.get("access"):
        area["access"] = moved("access", area["access"])
    if area.get("strata") and area["strata"] not in ("shore-bands", "zones"):
        area["strata"] = moved("strata", area["strata"])
    return _strip(settings)


def _next_plan_header(assessment: Any, results_name: str) -> str:
    r = assessment.next_allocation
    lines = [
        f"Plan for the next season, written by 'geosample assess' on {dt.date.today().isoformat()} from {results_name}.",
        "Same settings as the assessed design, with these changes:",
        "- no seed: 'geosample plan' draws a fresh one and records it;",
        "- [time] start, end and skip moved one year on: check them (holidays move);",
    ]
    if r is not None:
        per = ", ".join(f"{s} {n}" for s, n in zip(r.strata, r.n))
        lines += [f"- allocation = \"{r.method}\" with the observed sd (and cost) per stratum under [size.strata.*];",
                  f"  suggested primary samples: {per} (total {r.total}, {r.bound} bound)."]
        if r.bound in ("chebyshev", "cantelli"):
            lines += [f"- n = {r.total}: the total that meets the tolerance with the declared range alone; the sds",
                      "  only split it (the report's guarantee for this n takes them as known, capped at range/2)."]
    if assessment.range_void:
        lines.append("WARNING: results fell outside the declared range, so this season gave no decision; raise "
                     "size.range (or set size.lower) before the next draw.")
    return "\n".join(lines)


def atomic_write_text(path: str | Path, text: str) -> Path:
    """Write ``text`` to ``path`` through a temporary file in the same folder and a rename."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=str(path.parent))
    try:
        mask = os.umask(0)
        os.umask(mask)
        os.chmod(tmp, 0o666 & ~mask)  # the permissions any new file gets (mkstemp makes it private: 0600)
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return path


def write_next_plan(assessment: Any, manifest: dict, path: str | Path, *, design_folder: str | Path,
                    results_name: str = "the results", overwrite: bool = False) -> Path:
    """Write the next season's plan TOML to ``path`` (refuses an existing file unless ``overwrite``)."""
    path = Path(path)
    if path.exists() and not overwrite:
        raise OutputExistsError(f"--next-plan file {str(path)!r} exists already. Choose another file name, or add "
                                "--overwrite to replace it.")
    data = next_plan_settings(assessment, manifest, plan_path=path, design_folder=design_folder)
    text = toml_dumps(data, header=_next_plan_header(assessment, results_name))
    return atomic_write_text(path, text)


# --------------------------------------------------------------------------- HTML
def _fmt(v: Any, digits: int = 4) -> str:
    if v is None:
        return "—"
    if isinstance(v, float):
        if not math.isfinite(v):
            return "—"
        return f"{v:.{digits}g}"
    return str(v)


def _pct(confidence: float) -> str:
    return f"{100 * confidence:.4f}".rstrip("0").rstrip(".") + "%"


def render_assessment(assessment: Any, *, results_name: str, results_sha256: str = "",
                      extra: dict | None = None) -> str:
    """The HTML page of an assessment (jinja2, autoescaped)."""
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(Path(__file__).with_name("templates"))),
        autoescape=True, undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True,
    )
    env.filters["fmt"] = _fmt
    env.filters["pct"] = _pct
    tpl = env.get_template("assessment.html.j2")
    from ..version import __version__

    return tpl.render(a=assessment.as_dict(), results_name=results_name, results_sha256=results_sha256,
                      version=__version__, extra=extra or {})


def write_assessment(assessment: Any, folder: str | Path, *, results_path: str | Path) -> Path:
    """Write (or replace) ``assessment.html`` in the design folder, atomically."""
    results_path = Path(results_path)
    digest = hashlib.sha256(results_path.read_bytes()).hexdigest() if results_path.exists() else ""
    html = render_assessment(assessment, results_name=results_path.name, results_sha256=digest)
    return atomic_write_text(Path(folder) / HTML_NAME, html)
