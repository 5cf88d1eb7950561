"""The manifest of a design and its verification.

``manifest.json`` records everything needed to re-derive a design: the SHA-256
of the plan and of every input layer, the resolved settings with the seed, the
frame CRS, the package and library versions, and the SHA-256 of every output.
:func:`verify` re-runs the design from the manifest and the input files and
lists every difference: an input layer changed, a site moved, a time changed,
an output edited, a library version that draws differently.

The manifest holds no clock time, so the same plan, inputs and seed give a
byte-identical manifest; the time of each draw is in the plan's draw record.
"""
from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import platform
from dataclasses import asdict
from importlib import metadata
from pathlib import Path
from typing import Any

from .errors import InputFileError
from .model import Design

__all__ = ["MANIFEST", "LIBRARIES", "write_manifest", "read_manifest", "verify", "Verification", "library_versions",
           "sha256_file", "sites_digest", "manifest_data", "listed_files", "folder_entries", "design_folder_problems"]

MANIFEST = "manifest.json"
#: A manifest larger than this is refused unread (a real one is tens of kilobytes).
MAX_MANIFEST_BYTES = 20 * 2**20
LIBRARIES = ("numpy", "scipy", "pandas", "shapely", "pyproj", "pyogrio", "geopandas", "networkx", "astral",
             "folium", "gpxpy", "jinja2")


def sha256_file(path: str | Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _read_bounded(path: Path, limit: int) -> bytes:
    """The bytes of a regular file of at most ``limit`` bytes (else InputFileError, never a hang)."""
    import stat

    try:
        st = os.stat(path, follow_symlinks=False)
    except OSError as exc:
        raise InputFileError(f"{str(path)!r} cannot be read ({exc.strerror}).") from None
    if not stat.S_ISREG(st.st_mode):
        raise InputFileError(f"{str(path)!r} is not a regular file; a design folder holds only regular files.")
    if st.st_size > limit:
        raise InputFileError(f"{str(path)!r} is {st.st_size} bytes, more than the {limit} a design file may be.")
    with open(path, "rb") as fh:
        return fh.read(limit + 1)[:limit]


def library_versions() -> dict[str, str]:
    """Versions of the libraries whose behaviour the draw depends on (GEOS and PROJ included)."""
    out = {"python": platform.python_version()}
    for name in LIBRARIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    try:
        import shapely

        out["GEOS"] = shapely.geos_version_string
    except Exception:  # pragma: no cover
        pass
    try:
        import pyproj

        out["PROJ"] = pyproj.proj_version_str
    except Exception:  # pragma: no cover
        pass
    return out


def _jsonable(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, (dt.date, dt.datetime)):
        return obj.isoformat()
    if hasattr(obj, "item") and callable(obj.item):
        return obj.item()
    if isinstance(obj, float) and obj != obj:
        return None
    return obj


def sites_digest(rows: list[dict]) -> str:
    """SHA-256 of the site table (ids, roles, ranks, coordinates, dates, times), canonical JSON."""
    keys = ("site_id", "stratum", "role", "reserve_rank", "visit_date", "planned_time", "x", "y")
    canon = [[str(r.get(k, "")) for k in keys] for r in rows]
    return hashlib.sha256(json.dumps(canon, separators=(",", ":")).encode()).hexdigest()


def manifest_data(design: Design, folder: Path, *, plan_sha256: str = "", plan_name: str | None = None,
                  outputs: dict[str, Path] | None = None, bundle: dict | None = None) -> dict:
    """The manifest of the design written in ``folder``, as a dict.

    ``outputs`` maps each written file's name (POSIX path relative to ``folder``) to its
    path; ``bundle`` says where the plan and inputs were copied in ``folder`` (see
    :func:`geosample.workflow.run_plan`), None when they were not. Every path in the
    manifest is relative to the design folder; none is absolute.
    """
    from .export.table import schedule_rows
    from .version import __version__

    folder = Path(folder)
    frame = design.frame
    crs = frame.crs
    epsg = crs.to_epsg() if hasattr(crs, "to_epsg") else None
    where = (bundle or {}).get("inputs", {})
    inputs = {}
    for label, info in sorted(design.inputs.items()):
        copy = where.get(label) or {}
        inputs[label] = {"path": copy.get("path"), "sha256": info["sha256"], "as_written": info["path"],
                         "files": {name: sha256_file(folder / name) for name in copy.get("files", ())}}
    plan_path = (bundle or {}).get("plan")
    data = {
        "format": "geosample-manifest/1",
        "geosample_version": __version__,
        "plan": {"path": plan_path, "name": plan_name, "sha256": plan_sha256} if plan_sha256 else None,
        "inputs": inputs,
        "settings": design.settings,
        "seed": str(design.seed),
        "seed_source": design.seed_source,
        "draw_count": design.draw_count,
        "registration": design.registration,
        "history": design.history,
        "crs": {
            "name": crs.name,
            "epsg": epsg,
            "wkt": crs.to_wkt(),
            "reason": frame.crs_reason,
        },
        "frame": {
            "water_area_m2": frame.water_area_m2,
            "area_m2": frame.area_m2,
            "strata": [{"name": s.name, "code": s.code, "area_m2": s.area_m2, "weight": s.weight}
                       for s in frame.strata],
            "removed": [asdict(r) for r in frame.removed],
            "warnings": list(frame.warnings),
        },
        "allocation": asdict(design.allocation),
        "draw": {"method": design.draw.method, "reserve": design.draw.reserve, "spacing_m": design.draw.spacing_m,
                 "balance": design.draw.balance, "sites": len(design.draw.sites)},
        "itinerary": {"travel_minutes_per_site": design.schedule.travel_minutes_per_site,
                      "routes": len(design.schedule.routes)},
        "days": dict(design.schedule.day_draw, times=design.schedule.time_draw),
        "sites_sha256": sites_digest(schedule_rows(design)),
        "libraries": library_versions(),
        "outputs": {name: sha256_file(p) for name, p in sorted((outputs or {}).items())},
    }
    return _jsonable(data)


def write_manifest(design: Design, folder: str | Path, **kw: Any) -> Path:
    """Write ``manifest.json`` into ``folder`` (deterministically: sorted keys, fixed layout)."""
    folder = Path(folder)
    data = manifest_data(design, folder, **kw)
    path = folder / MANIFEST
    path.write_text(json.dumps(data, indent=2, sort_keys=True, ensure_ascii=False) + "\n", encoding="utf-8")
    return path


def read_manifest(folder: str | Path) -> dict:
    """Read a design folder's manifest, with clear errors for a folder that is not a design.

    The file is read only if it is a regular file of bounded size (never a link to a device),
    and must hold a JSON object.
    """
    folder = Path(folder)
    path = folder / MANIFEST
    if not folder.exists():
        raise InputFileError(f"design folder {str(folder)!r} does not exist. Give the folder that "
                             "'geosample plan ... -o FOLDER' wrote.")
    if not path.exists() and not path.is_symlink():
        raise InputFileError(f"{str(folder)!r} has no {MANIFEST}: it is not a design folder written by "
                             "'geosample plan'.")
    raw = _read_bounded(path, MAX_MANIFEST_BYTES)  # a regular file of bounded size, else InputFileError
    try:
        data = json.loads(raw.decode("utf-8"))
    except (ValueError, RecursionError, OSError) as exc:  # bad JSON or UTF-8, a 5000-digit number, deep nesting
        reason = "nested too deeply" if isinstance(exc, RecursionError) else (
            exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)[:200])
        raise InputFileError(f"{str(path)!r} is not a readable manifest ({reason}). It was edited or damaged; "
                             "write the design again with 'geosample plan'.") from None
    if not isinstance(data, dict):
        raise InputFileError(f"{str(path)!r} is not a manifest: it holds a JSON {type(data).__name__}, not an "
                             "object. It was edited or damaged; write the design again with 'geosample plan'.")
    return data


# --------------------------------------------------------------------------- what a design folder holds
#: At most this many entries are listed in a design folder (a folder with more is not a design).
MAX_ENTRIES = 20_000


def listed_files(manifest: dict) -> dict[str, str | None]:
    """Every file the manifest accounts for: POSIX path relative to the folder -> recorded SHA-256.

    ``manifest.json`` itself maps to None (it cannot hold its own hash).
    """
    out: dict[str, str | None] = {MANIFEST: None}
    for name, digest in (manifest.get("outputs") or {}).items():
        out[str(name)] = digest
    plan = manifest.get("plan") or {}
    if isinstance(plan, dict) and plan.get("path"):
        out[str(plan["path"])] = plan.get("sha256")
    for info in (manifest.get("inputs") or {}).values():
        if not isinstance(info, dict):
            continue
        if info.get("path"):
            out[str(info["path"])] = info.get("sha256")
        for name, digest in (info.get("files") or {}).items():
            out[str(name)] = digest
    return out


def folder_entries(folder: str | Path) -> list[str]:
    """Everything in ``folder``, as POSIX paths relative to it: files, links, other non-regular entries,
    and empty folders (with a trailing ``/``). Links are listed, never followed."""
    folder = Path(folder)
    out: list[str] = []
    for root, dirs, files in os.walk(folder, followlinks=False):
        here = Path(root)
        for d in list(dirs):
            if (here / d).is_symlink():
                out.append((here / d).relative_to(folder).as_posix())
                dirs.remove(d)
        if here != folder and not dirs and not files:
            out.append(here.relative_to(folder).as_posix() + "/")
        out.extend((here / f).relative_to(folder).as_posix() for f in files)
        if len(out) > MAX_ENTRIES:
            raise InputFileError(f"{str(folder)!r} holds more than {MAX_ENTRIES} files: it is not a design folder "
                                 "written by 'geosample plan'.")
    return sorted(out)


def design_folder_problems(folder: str | Path) -> list[str]:
    """Why ``folder`` is not a design folder that geosample may replace (empty list: it is one).

    A folder may be replaced only when its ``manifest.json`` is a geosample manifest, every entry in
    the folder is a regular file listed by that manifest, and every listed file still has the SHA-256
    the manifest records (so results typed into ``schedule.csv``, or notes added, are never lost).
    """
    folder = Path(folder)
    path = folder / MANIFEST
    if path.is_symlink() or not path.is_file():
        return [f"it has no {MANIFEST} (it is not a design folder written by 'geosample plan')"]
    try:
        manifest = json.loads(_read_bounded(path, MAX_MANIFEST_BYTES).decode("utf-8"))
        listed = listed_files(manifest) if isinstance(manifest, dict) else {}
    except (ValueError, UnicodeDecodeError, AttributeError, TypeError, InputFileError):
        return [f"its {MANIFEST} is not a readable geosample manifest"]
    if not str(manifest.get("format", "")).startswith("geosample-manifest/"):
        return [f"its {MANIFEST} is not a geosample manifest"]
    problems = []
    for entry in folder_entries(folder):
        p = folder / entry
        if entry not in listed:
            problems.append(f"{entry} is not part of the design")
        elif p.is_symlink() or not p.is_file():
            problems.append(f"{entry} is not a regular file")
        elif listed[entry] is not None and sha256_file(p) != listed[entry]:
            problems.append(f"{entry} was changed after the design was written")
    return problems


# --------------------------------------------------------------------------- verify
def verify(folder: str | Path, *, progress: Any = None, inputs_dir: str | Path | None = None) -> "Verification":
    """Re-derive the design in ``folder`` and compare everything in it (:func:`geosample.verifier.verify`)."""
    from .verifier import verify as _verify

    return _verify(folder, progress=progress, inputs_dir=inputs_dir)


def __getattr__(name: str) -> Any:
    if name == "Verification":
        from .verifier import Verification

        return Verification
    raise AttributeError(name)
