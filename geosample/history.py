"""The draw history: every draw made for a plan, keyed by the plan's content.

Re-drawing until the sites look convenient defeats the randomisation, so each
``geosample plan`` run is recorded, and the design's report and manifest say how
many draws were made *for this plan*. "This plan" means its content, not its
file name: :func:`content_key` is the SHA-256 of the resolved settings (without
the seed, the seed text, the title and the layer file names) together with the
SHA-256 of every input layer. Copying or renaming the plan or its layers, or
editing its comments, does not start a new history; changing a setting that
changes the draw does. Draws over the same input layers with other settings are
counted too, apart: changing a setting after seeing the sites is a re-draw as well.

The history is kept in three places, read together (a draw is counted once):

- the per-user store, one CSV per set of input layers (:func:`store_dir`; the
  environment variable ``GEOSAMPLE_HISTORY_DIR`` moves it);
- the record beside the plan file (``PLAN.toml.draws.csv``);
- ``draws.csv`` inside each design folder (the history up to and including that
  draw), covered by the manifest; a re-draw into the same folder, or from a
  design's bundled ``inputs/plan.toml``, reads the earlier package's copy.

What it cannot prove: all three are files on the author's computer, which the
author can delete or edit. The count is a floor, not a proof that no other draw
was made. Only a registered draw (:mod:`geosample.registration`) shows that the
seed was fixed before anyone could see the sites.

This module is an edge: it reads and writes the history files. :func:`content_key`
is pure.
"""
from __future__ import annotations

import csv
import datetime as dt
import hashlib
import json
import logging
import os
import re
import secrets
import sys
from pathlib import Path
from typing import Iterable

from .audit import _jsonable as _canon  # settings as plain JSON values (the manifest's own rule)

__all__ = ["FIELDS", "FILE_NAME", "content_key", "inputs_key", "same_plan", "store_dir", "store_path", "read_rows", "gather", "new_row",
           "write_rows", "append_row", "manifest_entry", "check_package"]

log = logging.getLogger(__name__)

FILE_NAME = "draws.csv"
FIELDS = ("draw_id", "time_utc", "content_sha256", "inputs_sha256", "plan_sha256", "seed", "seed_source", "registration_sha256",
          "n_primary", "n_sites", "output")
#: Settings left out of the content key: the seed (a re-draw with another seed is the
#: thing counted), and what does not change the draw.
_IGNORED = {"draw": ("seed", "seed_text", "seed_used", "seed_source"), "survey": ("title", "parameter", "units"),
            "export": None}
_PATH_KEYS = ("water", "exclude", "access", "strata")
_MAX_ROWS = 100_000


def content_key(settings: dict, inputs: dict[str, str]) -> str:
    """The plan's content key: SHA-256 of its draw-relevant settings and its input layers' SHA-256.

    Parameters
    ----------
    settings : dict
        Resolved plan settings (``Plan.settings``, or a manifest's ``settings``).
    inputs : dict
        Input label (``water``, ``exclude[0]``...) -> SHA-256 of the layer file.

    The canonical form is compact JSON with sorted keys (UTF-8) of
    ``{"inputs": {label: sha256}, "settings": ...}``, the settings without
    ``draw.seed``, ``draw.seed_text``, the labels ``survey.title``,
    ``survey.parameter``, ``survey.units``, the ``export`` section and the layer
    paths (the layers are identified by their SHA-256 instead), dates as ISO 8601.
    """
    s = _canon(settings)
    assert isinstance(s, dict)
    s = {k: dict(v) if isinstance(v, dict) else v for k, v in s.items()}
    for section, keys in _IGNORED.items():
        if keys is None:
            s.pop(section, None)
            continue
        for key in keys:
            if isinstance(s.get(section), dict):
                s[section].pop(key, None)
    area = s.get("area")
    if isinstance(area, dict):
        for key in _PATH_KEYS:
            if key != "strata" or "strata" in inputs:  # a generated-strata keyword stays
                area.pop(key, None)
    canon = json.dumps({"inputs": {str(k): str(v) for k, v in sorted(inputs.items())}, "settings": s},
                       sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(canon.encode("utf-8")).hexdigest()


def inputs_key(inputs: dict[str, str]) -> str:
    """SHA-256 of the input layers alone (compact sorted JSON of label -> SHA-256): draws with any settings."""
    canon = json.dumps({str(k): str(v) for k, v in sorted(inputs.items())}, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(canon.encode("utf-8")).hexdigest()


def same_plan(row: dict, key: str, plan_sha256: str = "") -> bool:
    """Whether a history row is a draw of the plan content ``key``.

    Rows written before content keys existed count when their ``plan_sha256`` is
    ``plan_sha256`` (the same plan file's bytes).
    """
    k = row.get("content_sha256", "")
    return k == key or (not k and bool(plan_sha256) and row.get("plan_sha256") == plan_sha256)


# --------------------------------------------------------------------------- where the history is kept
def store_dir() -> Path:
    """The per-user history folder (``GEOSAMPLE_HISTORY_DIR``, else the platform's per-user data folder)."""
    env = os.environ.get("GEOSAMPLE_HISTORY_DIR")
    if env:
        return Path(env).expanduser()
    if sys.platform == "win32":
        base = Path(os.environ.get("LOCALAPPDATA") or Path.home() / "AppData" / "Local")
    elif sys.platform == "darwin":
        base = Path.home() / "Library" / "Application Support"
    else:
        base = Path(os.environ.get("XDG_DATA_HOME") or Path.home() / ".local" / "share")
    return base / "geosample" / "draws"


def store_path(key: str) -> Path:
    """The per-user history file of one set of input layers (:func:`inputs_key`)."""
    return store_dir() / f"{key}.csv"


def read_rows(path: Path) -> list[dict]:
    """The rows of a history file; a missing, unreadable or damaged file gives [] with a warning."""
    path = Path(path)
    if not path.exists():
        return []
    if not path.is_file():
        log.warning("draw history %s is not a regular file; it was not read", path)
        return []
    try:
        with open(path, newline="", encoding="utf-8") as fh:
            rows = []
            for i, row in enumerate(csv.DictReader(fh)):
                if i >= _MAX_ROWS:
                    break
                rows.append({k: (v or "") for k, v in row.items() if isinstance(k, str)})
            return rows
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        log.warning("draw history %s could not be read (%s); draws recorded only there are not counted", path, exc)
        return []


def _identity(row: dict) -> tuple[str, ...]:
    if row.get("draw_id"):
        return ("id", row["draw_id"])
    return ("time", row.get("time_utc", ""), row.get("seed", ""))


def gather(key: str, plan_sha256: str, sources: Iterable[Path], inputs: str = "") -> list[dict]:
    """Every recorded draw of the content ``key`` or over the input layers ``inputs``, each once, oldest first.

    :func:`same_plan` tells which of them are draws of this plan.
    """
    seen: dict[tuple, dict] = {}
    for src in sources:
        for row in read_rows(src):
            if same_plan(row, key, plan_sha256) or (inputs and row.get("inputs_sha256") == inputs):
                seen.setdefault(_identity(row), row)
    return sorted(seen.values(), key=lambda r: (r.get("time_utc", ""), r.get("draw_id", "")))


def new_row(*, key: str, inputs: str, plan_sha256: str, seed: int, seed_source: str, registration_sha256: str,
            n_primary: int, n_sites: int, output: str, now: dt.datetime | None = None) -> dict:
    """The history row of a new draw (``output`` is the design folder's name only: no absolute path)."""
    now = now or dt.datetime.now(dt.timezone.utc)
    return {
        "draw_id": secrets.token_hex(8),
        "time_utc": now.astimezone(dt.timezone.utc).replace(microsecond=0).isoformat(),
        "content_sha256": key, "inputs_sha256": inputs, "plan_sha256": plan_sha256, "seed": str(seed), "seed_source": seed_source,
        "registration_sha256": registration_sha256, "n_primary": str(n_primary), "n_sites": str(n_sites),
        "output": output,
    }


def write_rows(rows: list[dict], path: Path) -> Path:
    """Write a whole history (the package's ``draws.csv``; earlier outputs by folder name only)."""
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=FIELDS, lineterminator="\n", extrasaction="ignore")
        w.writeheader()
        for r in rows:
            row = {k: r.get(k, "") for k in FIELDS}
            row["output"] = re.split(r"[\\/]", str(row["output"]).rstrip("\\/"))[-1]  # a folder name, no path
            w.writerow(row)
    return path


def append_row(path: Path, row: dict) -> None:
    """Append one draw to a history file (created with a header when missing).

    An older file keeps its own columns (extra fields are left out of it).
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fields: tuple[str, ...] = FIELDS
    if path.exists() and path.stat().st_size > 0:
        with open(path, newline="", encoding="utf-8") as fh:
            header = next(csv.reader(fh), None)
        if header:
            fields = tuple(header)
    new = not path.exists() or path.stat().st_size == 0
    with open(path, "a", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=fields, lineterminator="\n", extrasaction="ignore")
        if new:
            w.writeheader()
        w.writerow({k: row.get(k, "") for k in fields})


def manifest_entry(key: str, rows: list[dict]) -> dict:
    """The manifest's ``history`` key (``rows``: the package's draws.csv, this draw last)."""
    same = sum(1 for r in rows if same_plan(r, key))
    return {"content_sha256": key, "draws": same, "other_settings_draws": len(rows) - same, "file": FILE_NAME,
            "this_draw": rows[-1]["draw_id"],
            "kept": "draws.csv in this folder (covered by the manifest); the per-user store and PLAN.toml.draws.csv "
                    "on the computer that made the draw. A history kept on a computer can be deleted: the count is "
                    "a floor. Only a registered draw shows the seed was fixed before the sites were seen."}


# --------------------------------------------------------------------------- check in verify
def check_package(folder: str | Path, manifest: dict) -> list[str]:
    """Differences between a design folder's ``draws.csv`` and its manifest (empty: consistent).

    Checks that the history's last draw is this one (same seed, same content key),
    that it has as many draws of this plan as the manifest's ``draw_count`` and as
    many over the same layers with other settings as it says, that every other
    draw is over the same layers, and that the content key is the one the
    manifest's settings and input hashes give. A
    manifest without a ``history`` key (made before it existed) gives no difference.
    """
    entry = manifest.get("history")
    if entry is None:
        return []
    if not isinstance(entry, dict):
        return ["manifest: history is not a table of values"]
    diffs: list[str] = []
    name = str(entry.get("file", FILE_NAME))
    if Path(name).name != name or name in ("", ".", "..") or "\\" in name:
        from .registration import printable as _p

        return [f"manifest: history file name {_p(name)!r} is not a plain file name"]
    path = Path(folder) / name
    if not path.is_file():
        return [f"the draw history {name} is missing from the design folder"]
    rows = read_rows(path)
    from .registration import printable

    key = str(entry.get("content_sha256", ""))
    settings = manifest.get("settings")
    given = manifest.get("inputs") if isinstance(manifest.get("inputs"), dict) else {}
    inputs = {str(k): str(v.get("sha256", "")) if isinstance(v, dict) else "" for k, v in given.items()}
    if isinstance(settings, dict):
        try:
            again = content_key(settings, inputs)
        except Exception:  # malformed settings are reported by the ordinary verify
            again = None
        if again is not None and again != key:
            diffs.append(f"history: content key {printable(key[:12])}... is not the one the manifest's settings and inputs "
                         f"give ({again[:12]}...)")
    if not rows:
        return diffs + [f"the draw history {name} holds no draw"]
    layers = inputs_key(inputs)
    same = [r for r in rows if r.get("content_sha256") == key]
    others = [r for r in rows if r.get("content_sha256") != key]
    if any(r.get("inputs_sha256") != layers for r in others):
        diffs.append(f"the draw history {name} holds draws over other input layers")
    if str(len(same)) != str(entry.get("draws")) or str(len(same)) != str(manifest.get("draw_count")):
        diffs.append(f"the draw history {name} holds {len(same)} draws of this plan; the manifest says "
                     f"{printable(entry.get('draws'))} (history) and {printable(manifest.get('draw_count'))} (draw_count)")
    if str(len(others)) != str(entry.get("other_settings_draws", 0)):
        diffs.append(f"the draw history {name} holds {len(others)} draws with other settings; the manifest says "
                     f"{printable(entry.get('other_settings_draws', 0))}")
    last = rows[-1]
    if last.get("seed") != str(manifest.get("seed")) or last.get("draw_id") != entry.get("this_draw"):
        diffs.append(f"the last draw in {name} is not this design's draw (seed {printable(last.get('seed'))}, id "
                     f"{printable(last.get('draw_id'))})")
    return diffs
