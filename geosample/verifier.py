"""``geosample verify``: re-derive a design folder and compare everything a reader may be shown.

What is checked (each difference is listed, exit 1; a folder that cannot be checked exits 2):

1. **The folder holds only the design.** Every entry is a regular file that ``manifest.json``
   lists (outputs, the bundled plan, each layer's bundled files); anything else (an extra
   ``schedule_FINAL.csv``, a README, a link, a device, an empty folder) is named. Only
   :data:`AFTER_DESIGN` (``assessment.html``, written later by ``assess``) is allowed unlisted,
   and reported as not checked. Every listed file has the recorded SHA-256.
2. **Nothing outside the folder is read.** Paths in the manifest are relative POSIX paths found
   by listing the folder without following links; an absolute or ``../`` path, or a link, is a
   difference and is never opened. Only regular files are read, each of bounded size.
3. **The design is re-derived** from the bundled plan (when it is unchanged; else from the
   manifest's settings) and the bundled layers with the recorded seed, after refusing settings
   beyond :data:`LIMITS` (a crafted ``size.n = 2e6`` would run for minutes).
4. **The whole manifest is compared key by key** with the one the re-derived design gives
   (:func:`geosample.audit.manifest_data`), so a figure edited anywhere (achieved tolerance,
   frame area, a constraint removed, the CRS reason, an output's entry removed) is named, and
   keys added later are covered without code here. :data:`GIVEN_KEYS` are the inputs of the
   re-run, not results of it. Library versions cannot be re-derived: a difference is reported as
   "made with other library versions", never silently accepted.
5. **Every output is re-written and compared byte for byte**; a page whose bytes depend on a
   rendering library's version (:data:`RENDERED`) that differs only there, with the same embedded
   design data (``<script type="application/json" id="geosample-design">``) and the recorded
   hash, is reported as "same design, rendered with another library version".
6. **Untrusted text is printed with control characters escaped** (:func:`printable`).
"""
from __future__ import annotations

import csv
import datetime as dt
import inspect
import io
import json
import os
import re
import stat
import tempfile
import unicodedata
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath
from typing import Any

from .audit import (MANIFEST, MAX_MANIFEST_BYTES, _read_bounded, folder_entries, library_versions, listed_files,
                    manifest_data, sha256_file)
from .errors import GeosampleError, InputFileError

__all__ = ["verify", "Verification", "check_manifest_shape", "printable", "GIVEN_KEYS", "GIVEN_OUTPUTS",
           "AFTER_DESIGN", "RENDERED", "LIMITS"]

#: Manifest keys that are inputs of the re-run (copied from the manifest), not compared.
GIVEN_KEYS = ("seed", "seed_source", "draw_count", "registration", "history")
#: Package files that cannot be re-rendered (written by the draw history); checked by their hash only.
GIVEN_OUTPUTS = frozenset({"draws.csv", "registration.json"})
#: Files another command writes into a design folder later: allowed unlisted, reported as not checked.
AFTER_DESIGN = frozenset({"assessment.html"})
#: Outputs whose bytes depend on these libraries' versions (beyond the design).
RENDERED = {"map.html": ("folium", "branca", "jinja2", "shapely", "GEOS"), "report.html": ("jinja2",)}
#: What verify re-runs at most (a real design is far below; a crafted manifest may not be).
LIMITS = {"primary sites": 20_000, "sites": 60_000, "per_day": 1_000, "season days": 3_700, "strata": 5_000}
#: Size limits for the files verify reads whole.
MAX_SCHEDULE_BYTES = 200 * 2**20
MAX_PACKAGE_BYTES = 4 * 2**30

_HEX64 = re.compile(r"[0-9a-f]{64}")
_DESIGN_BLOCK = re.compile(r'<script type="application/json" id="geosample-design">(.*?)</script>', re.S)


@dataclass(frozen=True)
class Verification:
    """The result of re-deriving a design: ``ok`` only if nothing differs.

    ``other_libraries`` lists the library versions that differ from the manifest's
    (``name: manifest -> here``); ``rendered_elsewhere`` the outputs that are the same
    design rendered with another library version.
    """

    ok: bool
    differences: tuple[str, ...]
    checked: dict = field(default_factory=dict)
    notes: tuple[str, ...] = ()
    other_libraries: tuple[str, ...] = ()
    rendered_elsewhere: tuple[str, ...] = ()


# --------------------------------------------------------------------------- text
def printable(text: Any, limit: int = 200) -> str:
    """``text`` safe for a terminal: control and format characters (escapes, bidi overrides,
    line breaks) written as ``\\x1b``/``\\u202e``; cut at ``limit`` characters."""
    out = []
    for ch in str(text):
        cat = unicodedata.category(ch)
        if cat in ("Cc", "Cf", "Zl", "Zp", "Co", "Cs", "Cn"):
            code = ord(ch)
            out.append(f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}" if code < 0x10000 else f"\\U{code:08x}")
        else:
            out.append(ch)
    s = "".join(out)
    return s if len(s) <= limit else s[: limit - 3] + "..."


def _show(value: Any) -> str:
    return printable(json.dumps(value, ensure_ascii=False, sort_keys=True), 120)


# --------------------------------------------------------------------------- manifest shape
def _bad(what: str, value: Any, expected: str) -> InputFileError:
    return InputFileError(f"{MANIFEST}: {what} is {_show(value)}, expected {expected}. The manifest was edited or "
                          "damaged; verify cannot check this folder (write the design again with 'geosample plan').")


def _need(obj: dict, key: str, types: tuple, expected: str, where: str = "", optional: bool = False) -> Any:
    if key not in obj:
        if optional:
            return None
        raise InputFileError(f"{MANIFEST}: {where}{key} is missing. The manifest was edited or damaged; verify "
                             "cannot check this folder (write the design again with 'geosample plan').")
    value = obj[key]
    if optional and value is None:
        return None
    if not isinstance(value, types) or isinstance(value, bool) and bool not in types:
        raise _bad(where + key, value, expected)
    return value


def _digest(value: Any, what: str) -> str:
    if not isinstance(value, str) or not _HEX64.fullmatch(value):
        raise _bad(what, value, "a SHA-256 (64 lowercase hexadecimal digits)")
    return value


def check_manifest_shape(m: Any) -> dict:
    """Check that a manifest has every key verify reads, of the right type; returns it.

    Raises :class:`InputFileError` (exit 2) naming the key, the value and what is expected.
    """
    if not isinstance(m, dict):
        raise _bad("the whole file", type(m).__name__, "a JSON object")
    fmt = _need(m, "format", (str,), "a text")
    if not fmt.startswith("geosample-manifest/"):
        raise _bad("format", fmt, '"geosample-manifest/1"')
    _need(m, "settings", (dict,), "a table of settings")
    seed = _need(m, "seed", (str, int), "the seed as digits")
    if not re.fullmatch(r"[0-9]{1,80}", str(seed)):  # a SHA-256 read as a whole number has at most 78 digits
        raise _bad("seed", seed, "a whole number >= 0 of at most 80 digits")
    _need(m, "seed_source", (str,), "a text", optional=True)
    count = _need(m, "draw_count", (int,), "a whole number >= 1")
    if count < 1 or count > 10**9:
        raise _bad("draw_count", count, "a whole number >= 1")
    inputs = _need(m, "inputs", (dict,), "a table of input layers")
    if len(inputs) > 1000:
        raise _bad("inputs", f"{len(inputs)} entries", "at most 1000 input layers")
    for label, info in inputs.items():
        where = f"inputs.{label}."
        if not isinstance(info, dict):
            raise _bad(f"inputs.{label}", info, "a table with path, sha256, as_written")
        _need(info, "path", (str,), "a path in the folder or null", where, optional=True)
        _digest(info.get("sha256"), where + "sha256")
        _need(info, "as_written", (str,), "the path as written in the plan", where)
        files = _need(info, "files", (dict,), "a table of file -> sha256", where, optional=True) or {}
        for name, digest in files.items():
            _digest(digest, f"{where}files.{name}")
    plan = m.get("plan")
    if plan is not None:
        if not isinstance(plan, dict):
            raise _bad("plan", plan, "a table with path, name, sha256, or null")
        _need(plan, "path", (str,), "a path in the folder or null", "plan.", optional=True)
        _need(plan, "name", (str,), "the plan file's name or null", "plan.", optional=True)
        _digest(plan.get("sha256"), "plan.sha256")
    outputs = _need(m, "outputs", (dict,), "a table of output file -> sha256")
    if not outputs:
        raise _bad("outputs", outputs, "the package's files with their SHA-256 (a manifest without its outputs "
                   "checks nothing)")
    for name, digest in outputs.items():
        _digest(digest, f"outputs.{name}")
    libs = _need(m, "libraries", (dict,), "a table of library -> version")
    for name, ver in libs.items():
        if not isinstance(ver, str):
            raise _bad(f"libraries.{name}", ver, "a version text")
    _need(m, "sites_sha256", (str,), "a SHA-256")
    return m


def read_manifest_strict(folder: Path) -> dict:
    """The manifest of ``folder``: a bounded read of a regular file, valid JSON, the right shape."""
    path = folder / MANIFEST
    if not path.exists() and not path.is_symlink():
        raise InputFileError(f"{printable(folder)!r} has no {MANIFEST}: it is not a design folder written by "
                             "'geosample plan'.")
    data = _read_bounded(path, MAX_MANIFEST_BYTES)
    try:
        manifest = json.loads(data.decode("utf-8"), parse_constant=_no_constant)
    except (ValueError, UnicodeDecodeError, RecursionError) as exc:
        raise InputFileError(f"{printable(path)!r} is not a readable manifest ({printable(exc, 120)}). It was "
                             "edited or damaged; write the design again with 'geosample plan'.") from None
    return check_manifest_shape(manifest)


def _no_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a JSON number")


# --------------------------------------------------------------------------- the folder's files
def _safe_relative(name: str) -> bool:
    """A relative POSIX path that stays inside the folder (no absolute path, no '..', no NUL or backslash)."""
    if not name or "\0" in name or "\\" in name or name.startswith("/") or re.match(r"^[A-Za-z]:", name):
        return False
    parts = PurePosixPath(name).parts
    return all(p not in ("..", ".", "") for p in parts)


def _check_folder(folder: Path, manifest: dict, diffs: list[str], notes: list[str]) -> set[str]:
    """Compare the folder's entries with the manifest's list; returns the listed files that may be read."""
    listed = listed_files(manifest)
    entries = folder_entries(folder)
    readable: set[str] = set()
    total = 0
    for name in sorted(listed):
        if not _safe_relative(name):
            diffs.append(f"the manifest names {printable(name)!r}, outside the design folder; verify reads "
                         "nothing outside it")
            continue
        p = folder / name
        try:
            st = os.lstat(p)
        except OSError:
            diffs.append(f"{printable(name)} is listed in the manifest but missing from the folder")
            continue
        if not stat.S_ISREG(st.st_mode) or name not in entries:
            diffs.append(f"{printable(name)} is not a regular file in the folder (a link, a folder or a device); "
                         "verify does not read it")
            continue
        total += st.st_size
        readable.add(name)
    if total > MAX_PACKAGE_BYTES:
        raise InputFileError(f"the files of {printable(folder)!r} add up to {total} bytes, more than verify reads "
                             f"({MAX_PACKAGE_BYTES}); this is not a design folder written by 'geosample plan'.")
    for entry in entries:
        if entry in listed:
            continue
        if entry in AFTER_DESIGN:
            notes.append(f"{entry} was written after the design (by 'geosample assess') and is not checked by "
                         "verify; re-run assess to check it")
            continue
        diffs.append(f"{printable(entry)} is in the folder but not in the manifest: it is not part of the design "
                     "and may mislead a reader (remove it, or keep it outside the design folder)")
    for name in sorted(readable):
        recorded = listed[name]
        if recorded is not None and sha256_file(folder / name) != recorded:
            diffs.append(f"{printable(name)} was altered after the design was written (its SHA-256 differs from "
                         "the manifest's)")
    return readable


# --------------------------------------------------------------------------- limits
def _check_limits(settings: dict, manifest: dict) -> None:
    """Refuse settings that would make the re-run far larger than any real design (before running it)."""
    def refuse(what: str, value: Any, limit: Any) -> InputFileError:
        return InputFileError(f"{MANIFEST}: {what} = {_show(value)} is beyond what verify re-runs ({limit}); a "
                              "design of that size is not checked. The manifest was probably crafted.")

    size = settings.get("size", {}) if isinstance(settings.get("size"), dict) else {}
    n = size.get("n")
    if isinstance(n, (int, float)) and not isinstance(n, bool) and n > LIMITS["primary sites"]:
        raise refuse("settings.size.n", n, f"at most {LIMITS['primary sites']} primary sites")
    if size.get("n") is None and size.get("tolerance") is not None:
        try:
            from .stats.sizing import sample_size

            need = sample_size(size["tolerance"], range=size.get("range"), sd=size.get("sd"),
                               confidence=size.get("confidence", 0.95), bound=size.get("bound", "chebyshev"),
                               sides=size.get("sides", "two")).n
        except (GeosampleError, ValueError, TypeError, KeyError, OverflowError, ZeroDivisionError):
            need = None  # the re-run gives the message
        if need is not None and need > LIMITS["primary sites"]:
            raise refuse("settings.size.tolerance", size["tolerance"],
                         f"it needs {need} primary sites; at most {LIMITS['primary sites']}")
    t = settings.get("time", {}) if isinstance(settings.get("time"), dict) else {}
    per_day = t.get("per_day")
    if isinstance(per_day, (int, float)) and per_day > LIMITS["per_day"]:
        raise refuse("settings.time.per_day", per_day, f"at most {LIMITS['per_day']}")
    start, end = t.get("start"), t.get("end")
    if isinstance(start, dt.date) and isinstance(end, dt.date) and (end - start).days > LIMITS["season days"]:
        raise refuse("settings.time.end", str(end), f"a season of at most {LIMITS['season days']} days")
    draw = manifest.get("draw") if isinstance(manifest.get("draw"), dict) else {}
    sites = draw.get("sites")
    if isinstance(sites, (int, float)) and sites > LIMITS["sites"]:
        raise refuse("draw.sites", sites, f"at most {LIMITS['sites']} sites")
    reserve = settings.get("draw", {}).get("reserve") if isinstance(settings.get("draw"), dict) else None
    if isinstance(reserve, (int, float)) and reserve > LIMITS["sites"] / max(LIMITS["primary sites"], 1) * 100:
        raise refuse("settings.draw.reserve", reserve, "a fraction of the primaries")


# --------------------------------------------------------------------------- comparisons
def _diff(found: Any, expected: Any, path: str, out: list[str]) -> None:
    """Every leaf where ``found`` (the manifest) and ``expected`` (re-derived) differ, by dotted path."""
    if isinstance(found, dict) and isinstance(expected, dict):
        for key in sorted(set(found) | set(expected), key=str):
            sub = f"{path}.{key}" if path else str(key)
            if key not in found:
                out.append(f"manifest {printable(sub)}: missing (the re-derived design gives {_show(expected[key])})")
            elif key not in expected:
                out.append(f"manifest {printable(sub)}: {_show(found[key])} is not part of the re-derived design")
            else:
                _diff(found[key], expected[key], sub, out)
        return
    if isinstance(found, list) and isinstance(expected, list) and len(found) == len(expected):
        for i, (f, e) in enumerate(zip(found, expected)):
            _diff(f, e, f"{path}[{i}]", out)
        return
    if found != expected or type(found) is not type(expected) and not (
            isinstance(found, (int, float)) and isinstance(expected, (int, float))):
        out.append(f"manifest {printable(path)}: {_show(found)}, but the re-derived design gives {_show(expected)}")


def _compare_rows(expected: list[dict], found: list[dict]) -> list[str]:
    diffs: list[str] = []
    exp = {r["site_id"]: r for r in expected}
    got = {r.get("site_id", ""): r for r in found}
    for sid in exp:
        if sid not in got:
            diffs.append(f"site {printable(sid)}: missing from schedule.csv")
    for sid in got:
        if sid not in exp:
            diffs.append(f"site {printable(sid)}: in schedule.csv but not in the re-derived design")
    for sid, e in exp.items():
        g = got.get(sid)
        if g is None:
            continue
        for key in ("stratum", "role", "reserve_rank", "visit_date", "planned_time", "lat", "lon", "x", "y"):
            ev, gv = str(e.get(key, "")), str(g.get(key, "") or "")
            ev, gv = ev[1:] if ev.startswith("'") else ev, gv[1:] if gv.startswith("'") else gv
            if ev != gv:
                what = "moved" if key in ("lat", "lon", "x", "y") else "changed"
                diffs.append(f"site {printable(sid)}: {key} {what}: design says {printable(ev)!r}, schedule.csv has "
                             f"{printable(gv)!r}")
    return diffs


def _design_block(path: Path) -> Any:
    try:
        text = _read_bounded(path, MAX_SCHEDULE_BYTES).decode("utf-8")
    except (InputFileError, UnicodeDecodeError):
        return None
    blocks = _DESIGN_BLOCK.findall(text)
    if len(blocks) != 1:
        return None
    try:
        return json.loads(blocks[0])
    except ValueError:
        return None


def _compare_outputs(folder: Path, found: dict, rewritten: dict[str, Path], readable: set[str],
                     versions_differ: set[str], diffs: list[str], notes: list[str],
                     elsewhere: list[str]) -> dict:
    """Outputs as recorded vs re-written; returns the 'outputs' the comparison of manifests should expect."""
    expected = {}
    for name, p in rewritten.items():
        digest = sha256_file(p)
        recorded = found.get(name)
        if recorded is None or recorded == digest:
            expected[name] = digest
            continue
        libs = [lib for lib in RENDERED.get(name, ()) if lib in versions_differ]
        same = (libs and name in readable and _design_block(folder / name) is not None
                and _design_block(folder / name) == _design_block(p))
        if same:
            expected[name] = recorded
            elsewhere.append(name)
            notes.append(f"{name}: same design, rendered with another library version ({', '.join(libs)}); its "
                         "design data match the re-derived design and the file has the recorded SHA-256")
        else:
            expected[name] = digest
            diffs.append(f"output {name} as re-derived differs from the one recorded in the manifest")
    for name, recorded in found.items():
        if name not in rewritten and name in GIVEN_OUTPUTS:
            expected[name] = recorded  # checked by its hash in the folder
    return expected


# --------------------------------------------------------------------------- verify
def _restore_dates(settings: dict) -> None:
    t = settings.get("time")
    if not isinstance(t, dict):
        return
    try:
        for key in ("start", "end"):
            if isinstance(t.get(key), str):
                t[key] = dt.date.fromisoformat(t[key])
        if isinstance(t.get("skip"), list):
            t["skip"] = [dt.date.fromisoformat(d) if isinstance(d, str) else d for d in t["skip"]]
    except ValueError as exc:
        raise _bad("settings.time", t, f"dates written as 2027-06-01 ({exc})") from None


def _bundle_of(folder: Path, manifest: dict, readable: set[str]) -> dict | None:
    """Where the plan and each layer's files are in the folder, as the re-derivation expects them."""
    from .workflow import layer_files

    inputs = manifest["inputs"]
    if not inputs or not all(info.get("path") for info in inputs.values()):
        return None
    out: dict = {"plan": (manifest.get("plan") or {}).get("path"), "inputs": {}}
    for label, info in inputs.items():
        main = info["path"]
        if main not in readable:
            raise _Stop()
        files = [p.relative_to(folder).as_posix() for p in layer_files(folder / main)]
        out["inputs"][label] = {"path": main, "files": [f for f in files if f in readable] or [main]}
    return out


class _Stop(Exception):
    """The design cannot be re-derived (the differences found so far say why)."""


def verify(folder: str | Path, *, progress: Any = None, inputs_dir: str | Path | None = None) -> Verification:
    """Re-derive the design in ``folder`` and compare everything in it (see the module docstring).

    ``inputs_dir``: for a design written with ``--no-bundle-inputs``, the folder holding its
    plan file and layers (read only with this explicit consent). Raises
    :class:`InputFileError` (exit 2) for a folder that cannot be checked.
    """
    folder = Path(folder)
    if not folder.is_dir():
        raise InputFileError(f"design folder {printable(folder)!r} does not exist or is not a folder. Give the folder "
                             "that 'geosample plan ... -o FOLDER' wrote.")
    manifest = read_manifest_strict(folder)
    diffs: list[str] = []
    notes: list[str] = []
    elsewhere: list[str] = []
    readable = _check_folder(folder, manifest, diffs, notes)

    # library versions: cannot be re-derived; reported, never silently accepted
    here = library_versions()
    from .version import __version__

    here["geosample"] = __version__
    recorded_libs = dict(manifest["libraries"])
    if isinstance(manifest.get("geosample_version"), str):
        recorded_libs["geosample"] = manifest["geosample_version"]
    other = tuple(f"{printable(name)} {printable(ver)} in the manifest, {here.get(name, 'not installed')} here"
                  for name, ver in sorted(recorded_libs.items()) if here.get(name) != ver)
    versions_differ = {name for name, ver in recorded_libs.items() if here.get(name) != ver}

    try:
        design, plan_info, bundle = _rederive(folder, manifest, readable, diffs, progress, inputs_dir)
    except _Stop:
        return _result(diffs, notes, other, elsewhere, {"inputs": len(manifest["inputs"]), "sites": 0,
                                                         "outputs": len(manifest["outputs"])})
    from .export import write_package
    from .export.table import schedule_rows

    expected_rows = schedule_rows(design)
    if "schedule.csv" in readable:
        text = _read_bounded(folder / "schedule.csv", MAX_SCHEDULE_BYTES).decode("utf-8", errors="replace")
        diffs += _compare_rows(expected_rows, list(csv.DictReader(io.StringIO(text, newline=""))))
    elif "schedule.csv" not in manifest["outputs"]:
        diffs.append("schedule.csv is missing from the design folder and from the manifest")

    with tempfile.TemporaryDirectory(prefix="geosample-verify-") as tmp:
        files = write_package(design, Path(tmp))
        rewritten = {name: Path(p) for name, p in files.items()}
        expected = manifest_data(design, folder, plan_sha256=plan_info["sha256"], plan_name=plan_info["name"],
                                 outputs=rewritten, bundle=bundle)
        expected["outputs"] = _compare_outputs(folder, manifest["outputs"], rewritten, readable, versions_differ,
                                               diffs, notes, elsewhere)
    for key in GIVEN_KEYS + ("libraries", "geosample_version"):
        expected.pop(key, None)
    found = {k: v for k, v in manifest.items() if k not in GIVEN_KEYS + ("libraries", "geosample_version")}
    _diff(found, expected, "", diffs)
    return _result(diffs, notes, other, elsewhere, {"inputs": len(manifest["inputs"]), "sites": len(expected_rows),
                                                    "outputs": len(manifest["outputs"])})


def _result(diffs, notes, other, elsewhere, checked) -> Verification:
    if other:
        notes = list(notes) + [f"made with other library versions: {'; '.join(other)}"]
    return Verification(ok=not diffs, differences=tuple(diffs), checked=checked, notes=tuple(notes),
                        other_libraries=tuple(other), rendered_elsewhere=tuple(elsewhere))


def _rederive(folder: Path, manifest: dict, readable: set[str], diffs: list[str], progress: Any,
              inputs_dir: str | Path | None):
    """The design as the bundled plan (or the manifest's settings), layers and seed give it."""
    from .design import load_layers, make_design
    from .plan import load_plan, plan_from_settings

    plan_entry = manifest.get("plan") or {}
    inputs = manifest["inputs"]
    bundle = _bundle_of(folder, manifest, readable)
    plan = None
    if bundle is not None:
        label_paths = {label: folder / info["path"] for label, info in inputs.items()}
        path = plan_entry.get("path")
        if path and path in readable and sha256_file(folder / path) == plan_entry.get("sha256"):
            plan = load_plan(folder / path)
    elif inputs_dir is not None:
        base = Path(inputs_dir)
        name = plan_entry.get("name") or "plan.toml"
        if not _safe_relative(name) or not (base / name).is_file():
            raise InputFileError(f"the plan {printable(name)!r} is not in {printable(base)!r} (--inputs).")
        plan = load_plan(base / name)
        if plan.sha256 != plan_entry.get("sha256"):
            diffs.append(f"the plan {printable(base / name)} differs from the one the design was made from")
        label_paths = plan.input_paths()
        for label, info in inputs.items():
            p = label_paths.get(label)
            if p is None or not p.is_file():
                raise InputFileError(f"input {printable(label)} ({printable(info['as_written'])!r}) is not in "
                                     f"{printable(base)!r} (--inputs).")
            if sha256_file(p) != info["sha256"]:
                diffs.append(f"input {printable(label)} ({printable(p)}) differs from the one the design was made from")
    else:
        raise InputFileError(f"the plan and layers are not in {printable(folder)!r} (it was written with "
                             "--no-bundle-inputs); give their folder with --inputs DIR to verify it.")
    for label, info in inputs.items():
        if bundle is not None and sha256_file(folder / info["path"]) != info["sha256"]:
            diffs.append(f"input {printable(label)} ({printable(info['path'])}) changed: its SHA-256 differs from "
                         "the manifest's")
    settings = json.loads(json.dumps(manifest["settings"]))
    if plan is not None:
        settings_plan = plan
    else:
        draw = settings.get("draw") if isinstance(settings.get("draw"), dict) else {}
        for extra in ("seed_used", "seed_source"):
            draw.pop(extra, None)
        _restore_dates(settings)
        settings_plan = plan_from_settings(settings, base_dir=folder)
    _check_limits(settings_plan.settings, manifest)
    kwargs: dict = {}
    params = inspect.signature(make_design).parameters
    for key in ("registration", "history"):
        if key in params and key in manifest:
            kwargs[key] = manifest[key]
    layers = load_layers(settings_plan, label_paths)
    design = make_design(settings_plan, layers=layers, seed=int(manifest["seed"]),
                         seed_source=manifest.get("seed_source") or "plan", draw_count=manifest["draw_count"],
                         inputs={k: {"path": v["as_written"], "sha256": v["sha256"]} for k, v in inputs.items()},
                         progress=progress, **kwargs)
    plan_info = {"sha256": plan_entry.get("sha256", ""), "name": plan_entry.get("name")}
    return design, plan_info, bundle
