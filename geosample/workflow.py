"""File-level workflows behind ``geosample plan`` and ``geosample demo``.

These are the edges: they read the plan and layers, call :func:`make_design`,
write the field package and the manifest into a temporary folder next to the
output, and rename it into place only when everything succeeded, so a failure
leaves nothing half-written. Every plan run is added to the plan's draw history
(:mod:`geosample.history`: keyed by the plan's content, kept in the package's
``draws.csv``, a per-user store and ``<plan>.draws.csv`` beside the plan), so
that re-drawing until the sites look convenient shows in the manifest and the report.
"""
from __future__ import annotations

import contextlib
import csv
import datetime as dt
import glob
import hashlib
import logging
import os
import shutil
import tempfile
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Callable, Iterator

from .errors import InputFileError, OutputExistsError
from .model import Design

__all__ = ["run_plan", "run_demo", "PlanRun", "draw_record_path", "count_draws", "copy_demo", "check_output",
           "output_lock", "layer_files", "SHAPEFILE_SIDECARS"]

log = logging.getLogger(__name__)

@dataclass(frozen=True)
class PlanRun:
    design: Design
    folder: Path
    files: dict[str, Path]
    draw_record: Path | None


def draw_record_path(plan_path: Path) -> Path:
    return plan_path.with_name(plan_path.name + ".draws.csv")


def count_draws(record: Path) -> int:
    """How many draws the record holds (0 when there is none)."""
    if not record.exists():
        return 0
    with open(record, newline="", encoding="utf-8") as fh:
        return sum(1 for _ in csv.DictReader(fh))


def check_output(out: Path, overwrite: bool, *, protect: tuple[Path, ...] = ()) -> None:
    """Refuse an output folder that would destroy what geosample did not write (before any work).

    ``out`` may be a new path, or, with ``overwrite``, a design folder written by
    geosample (:func:`geosample.audit.design_folder_problems` is empty). Never a link,
    the current folder or one of its parents (the file system's root included), nor a
    folder that holds one of ``protect`` (the plan and its input files).
    """
    from .audit import design_folder_problems

    text = str(out)
    if out.is_symlink():
        raise OutputExistsError(
            f"output {text!r} is a symbolic link (to {os.readlink(out)!r}); geosample writes only to a folder "
            "path of its own. Give the real folder with -o, or a new name.")
    res = out.resolve()
    cwd = Path.cwd().resolve()
    if res == cwd or res in cwd.parents:
        raise OutputExistsError(
            f"output {text!r} is the current folder or a folder above it; the design needs a folder of its own. "
            "Give a new folder name with -o, e.g. -o design.")
    for p in protect:
        p = Path(p).resolve()
        if res == p or res in p.parents:
            raise OutputExistsError(
                f"output {text!r} holds {str(p)!r}, which this plan reads; geosample never writes over the plan "
                "or its inputs. Choose an output folder outside it (if the plan is a design's inputs/plan.toml, "
                "copy the inputs folder elsewhere first).")
    if not (out.exists() or out.is_symlink()):
        return
    if not out.is_dir():
        raise OutputExistsError(f"output {text!r} is a file, not a folder. Choose another path with -o.")
    if not overwrite:
        raise OutputExistsError(
            f"output folder {text!r} exists already. Choose another folder with -o, or add --overwrite "
            "to replace it (only a design folder written by geosample is replaced).")
    problems = design_folder_problems(out)
    if problems:
        more = f" and {len(problems) - 5} more" if len(problems) > 5 else ""
        raise OutputExistsError(
            f"--overwrite replaces only a design folder written by geosample, left as it was written; "
            f"{text!r} is not one: {'; '.join(problems[:5])}{more}. Nothing was changed. Choose a new folder "
            "with -o, or move what you added out of it first.")


def _lock_path(out: Path) -> Path:
    return out.parent / f".{out.name}.geosample-lock"


@contextlib.contextmanager
def output_lock(out: Path) -> Iterator[None]:
    """Hold a lock on ``out`` (a file beside it) for the whole run; a second run to ``out`` exits 2.

    With ``fcntl`` the lock is released by the system if the process dies, and the
    lock file is removed on exit; elsewhere the lock file itself is the lock.
    """
    lock = _lock_path(out)
    busy = OutputExistsError(
        f"another geosample run is writing {str(out)!r} now (lock {str(lock)!r}). Wait for it to finish, or "
        "choose another folder with -o.")
    try:
        import fcntl
    except ImportError:  # pragma: no cover - not POSIX
        fcntl = None
    while True:
        try:
            flags = os.O_RDWR | os.O_CREAT | (0 if fcntl else os.O_EXCL)
            fd = os.open(lock, flags, 0o666)
        except FileExistsError:  # pragma: no cover - not POSIX
            raise busy from None
        except OSError as exc:
            raise InputFileError(
                f"cannot write in {str(out.parent)!r}, where the output folder goes ({exc.strerror}). Choose an "
                "output folder you can write to with -o.") from None
        if fcntl is None:  # pragma: no cover
            break
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            os.close(fd)
            raise busy from None
        # the file may have been removed by the run that held it: lock the file that is there now
        try:
            same = os.path.samestat(os.fstat(fd), os.stat(lock))
        except FileNotFoundError:
            same = False
        if same:
            break
        os.close(fd)
    try:
        yield
    finally:
        with contextlib.suppress(OSError):
            os.unlink(lock)
        os.close(fd)


def _ordinary_mode(path: Path) -> None:
    """Give a folder made by mkdtemp (0700) the permissions the user's umask gives any new folder."""
    mask = os.umask(0)
    os.umask(mask)
    os.chmod(path, 0o777 & ~mask)


PARTIAL_MARK = ".geosample-partial"


def _leftovers(out: Path) -> None:
    """Remove this output's unfinished folders from killed runs (marked as ours); report older designs."""
    for p in out.parent.glob(f".{glob.escape(out.name)}.*.partial"):
        if p.is_dir() and not p.is_symlink() and (p / PARTIAL_MARK).is_file():
            shutil.rmtree(p, ignore_errors=True)
            log.warning("removed %s, left unfinished by an earlier geosample run that was stopped", p)
    olds = [*out.parent.glob(f".{glob.escape(out.name)}.*.geosample-old"), out.with_name(out.name + ".geosample-old")]
    for p in (p for p in olds if p.exists() or p.is_symlink()):  # (the second: the name older versions used)
        log.warning("%s holds the design that an earlier, stopped run of geosample was replacing in %s; "
                    "look at it and remove it or rename it back (geosample leaves it alone)", p, out)


def _swap_in(tmp: Path, out: Path) -> None:
    """Move the finished folder ``tmp`` to ``out`` (replacing the design there, if any)."""
    if out.exists():
        old = Path(tempfile.mkdtemp(prefix=f".{out.name}.", suffix=".geosample-old", dir=out.parent))
        old.rmdir()
        out.rename(old)
        try:
            tmp.rename(out)
        except BaseException:
            old.rename(out)
            raise
        shutil.rmtree(old)
    else:
        tmp.rename(out)


def _make_parent(parent: Path) -> list[Path]:
    """Create the output's parent folders; returns those created (removed again if the run fails)."""
    made = []
    p = parent
    while not p.exists() and not p.is_symlink() and p != p.parent:
        made.append(p)
        p = p.parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputFileError(f"cannot create {str(parent)!r} for the output folder ({exc.strerror}). Choose an "
                             "output folder you can write to with -o.") from None
    return made


def run_plan(plan_path: str | Path, out: str | Path, *, overwrite: bool = False,
             progress: Callable[[str], None] | None = None, record: bool = True,
             bundle_inputs: bool = True, registration: str | Path | None = None,
             public_value: str | None = None) -> PlanRun:
    """Design from a plan file and write the field package and manifest into ``out``.

    Raises
    ------
    OutputExistsError
        ``out`` exists and ``overwrite`` is False, or ``out`` may not be replaced
        (see :func:`check_output`), or another run holds its lock (all checked before any work).
    GeosampleError
        Any problem with the plan, the layers or the feasibility of the design.

    The plan and its layers (a Shapefile with its own side files) are copied into
    ``out/inputs/`` unless ``bundle_inputs`` is False, so the design folder alone
    can be verified wherever it is copied.

    With ``registration`` (a file written by ``geosample register``) and
    ``public_value`` the seed is the registered one (:mod:`geosample.registration`);
    the plan and its layers must be the registered ones and the public date must
    have begun. The draw history (:mod:`geosample.history`) is read from every
    place it is kept, written into ``out/draws.csv`` and, with ``record``, appended
    to the per-user store and the record beside the plan, before ``out`` is swapped in.
    """
    from .plan import load_plan

    plan_path = Path(plan_path)
    out = Path(out)
    reg = _read_registration(registration, public_value)
    plan = load_plan(plan_path)
    for w in plan.warnings:
        log.warning(w)
    protect = tuple(p for p in (plan.path, *plan.input_paths().values()) if p is not None)
    check_output(out, overwrite, protect=protect)
    made = _make_parent(out.parent)
    try:
        with output_lock(out):
            check_output(out, overwrite, protect=protect)  # again, now that no other run can change it
            _leftovers(out)
            tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", suffix=".partial", dir=out.parent))
            try:
                (tmp / PARTIAL_MARK).write_text("unfinished output of geosample plan\n", encoding="utf-8")
                _ordinary_mode(tmp)
                design, files, rec = _draw_into(tmp, plan, plan_path, out, reg=reg, public_value=public_value,
                                                record=record, bundle_inputs=bundle_inputs, progress=progress)
                _swap_in(tmp, out)
            except BaseException:
                shutil.rmtree(tmp, ignore_errors=True)
                raise
    except BaseException:
        for p in made:  # folders this run created for the output, innermost first
            with contextlib.suppress(OSError):
                p.rmdir()
        raise
    written = {name: out / name for name in files}
    written["manifest.json"] = out / "manifest.json"
    # (the frame's warnings were logged by geometry as they arose)
    for w in tuple(design.draw.warnings) + tuple(design.schedule.warnings):
        log.warning(w)
    return PlanRun(design, out, written, rec)


def _draw_into(tmp: Path, plan, plan_path: Path, out: Path, *, reg, public_value: str | None, record: bool,
               bundle_inputs: bool, progress: Callable[[str], None] | None) -> tuple[Design, dict, Path | None]:
    """The draw itself, written into ``tmp`` (under the output lock), the history recorded last.

    Returns the design, the package files (name -> path in ``tmp``) and the record beside the plan.
    """
    from . import history
    from . import registration as registry
    from .audit import sha256_file, write_manifest
    from .design import load_layers, make_design, resolve_seed
    from .export import write_package

    layers = load_layers(plan)  # first: it names a missing or unreadable layer file
    locations = plan.input_paths()
    inputs = {label: {"path": plan.input_names()[label], "sha256": sha256_file(p)} for label, p in locations.items()}
    input_sha = {label: info["sha256"] for label, info in inputs.items()}
    if reg is not None:
        registry.check_plan(reg, plan, input_sha, plan_path=plan_path)
        seed, seed_source = registry.registered_seed(reg.sha256, public_value or ""), "registered"
        reg_entry = registry.manifest_entry(reg, public_value or "")
    else:
        seed, seed_source = resolve_seed(plan.settings)
        reg_entry = None
    key, layers_key = history.content_key(plan.settings, input_sha), history.inputs_key(input_sha)
    rec = draw_record_path(plan.path) if plan.path else None
    earlier = (history.gather(key, plan.sha256, _history_sources(layers_key, rec, plan.path, out), layers_key)
               if record else [])
    row = history.new_row(key=key, inputs=layers_key, plan_sha256=plan.sha256, seed=seed, seed_source=seed_source,
                          registration_sha256=reg.sha256 if reg else "", n_primary=0, n_sites=0, output=out.name)
    # rows written before content keys existed were matched by the plan file's bytes: label them with its keys
    earlier = [r if r.get("content_sha256") else {**r, "content_sha256": key, "inputs_sha256": layers_key}
               for r in earlier]
    rows = earlier + [row]
    draws = sum(1 for r in rows if history.same_plan(r, key))
    design = make_design(plan, layers=layers, seed=seed, seed_source=seed_source, draw_count=draws,
                         inputs=inputs, progress=progress, registration=reg_entry,
                         history=history.manifest_entry(key, rows))
    row.update(n_primary=str(design.allocation.total), n_sites=str(len(design.draw.sites)))
    if progress:
        progress("writing the field package")
    files = write_package(design, tmp)
    files[history.FILE_NAME] = history.write_rows(rows, tmp / history.FILE_NAME)
    if reg is not None:
        files[registry.FILE_NAME] = _copy_registration(reg, tmp / registry.FILE_NAME)
    bundle = _bundle(locations, plan.path, tmp) if bundle_inputs else None
    write_manifest(design, tmp, plan_sha256=plan.sha256, outputs=dict(files), bundle=bundle,
                   plan_name=plan.path.name if plan.path else None)
    (tmp / PARTIAL_MARK).unlink()
    if record:  # HOOK(register): the history is written before the new folder is swapped in
        _record_draw(row, [history.store_path(layers_key)] + ([rec] if rec else []))
    return design, files, rec


def _read_registration(path: str | Path | None, public_value: str | None):
    """The registration to draw under (its public date checked), or None; refuses half of the pair."""
    from . import registration as registry
    from .errors import SettingError

    if path is None and public_value is None:
        return None
    if path is None:
        raise SettingError("--public-value", registry.printable(public_value), "a value given together with "
                           "--registration", fix="add --registration REGISTRATION.json (the file 'geosample "
                           "register' wrote), or leave out --public-value")
    if public_value is None:
        raise SettingError("--public-value", "(missing)", "the public value the registration names, as published",
                           fix=f"add --public-value \"...\" with the value published by the source named in {path}")
    registry.public_value(public_value)
    reg = registry.read_registration(path)
    registry.check_public_date(reg)
    return reg


def _copy_registration(reg, dest: Path) -> Path:
    """Copy the registration's bytes into the package (refused if the file changed since it was read)."""
    from .errors import RegistrationError

    data = Path(reg.path).read_bytes()
    if hashlib.sha256(data).hexdigest() != reg.sha256:
        raise RegistrationError(f"registration file {str(reg.path)!r} changed while the design was being made. "
                                "Fix: restore it and run again.")
    dest.write_bytes(data)
    return dest


def _history_sources(key: str, rec: Path | None, plan_path: Path | None, out: Path) -> list[Path]:
    """Every place this plan's draws may be recorded (see :mod:`geosample.history`)."""
    from . import history

    sources = [history.store_path(key)]
    if rec:
        sources.append(rec)
    if out.is_dir():  # a re-draw into the same folder
        sources.append(out / history.FILE_NAME)
    if plan_path is not None and plan_path.parent.name == "inputs" and (plan_path.parent.parent / "manifest.json").is_file():
        sources.append(plan_path.parent.parent / history.FILE_NAME)  # a design's bundled plan
    return sources


def _record_draw(row: dict, places: list[Path]) -> None:
    from . import history

    for place in places:
        try:
            history.append_row(place, row)
        except OSError as exc:
            log.warning("could not append to the draw history %s (%s); this draw is not recorded there (it is in "
                        "the design's draws.csv)", place, exc.strerror)


#: A Shapefile's own side files: the layer's stem followed by one of these (any case).
SHAPEFILE_SIDECARS = (".shx", ".dbf", ".prj", ".cpg", ".qix", ".sbn", ".sbx", ".fbn", ".fbx", ".ain", ".aih",
                      ".atx", ".ixs", ".mxs", ".qmd", ".shp.xml", ".aux.xml")


def layer_files(src: Path) -> list[Path]:
    """The files that make up one layer: the file itself, a Shapefile's own side files, or a folder's files."""
    src = Path(src)
    if src.is_dir():
        return sorted(p for p in src.rglob("*") if p.is_file() and not p.is_symlink())
    files = [src]
    if src.suffix.lower() == ".shp":
        stem = src.name[: -len(src.suffix)]
        for side in sorted(src.parent.iterdir()):
            rest = side.name[len(stem):]
            if side != src and side.name.startswith(stem) and rest.lower() in SHAPEFILE_SIDECARS and side.is_file():
                files.append(side)
    return files


def _bundle(locations: dict[str, Path], plan_path: Path | None, folder: Path) -> dict:
    """Copy the plan and each layer's files into ``folder/inputs``.

    Returns ``{"plan": "inputs/plan.toml" or None, "inputs": {label: {"path": ..., "files": [...]}}}``
    with POSIX paths relative to ``folder``.
    """
    dest = folder / "inputs"
    dest.mkdir(parents=True, exist_ok=True)
    used: set[str] = {"plan.toml"} if plan_path is not None else set()
    result: dict = {"plan": None, "inputs": {}}
    for label, src in locations.items():
        src = Path(src)
        name = src.name
        if name.lower() in used:
            name = f"{label.replace('[', '_').replace(']', '')}_{name}"
        parts = layer_files(src)
        names = []
        stem, new_stem = src.name[: len(src.name) - len(src.suffix)], name[: len(name) - len(src.suffix)]
        for part in parts:
            if src.is_dir():
                rel = f"{name}/{part.relative_to(src).as_posix()}"
            else:  # the layer's own side files keep their endings under the (possibly renamed) stem
                rel = new_stem + part.name[len(stem):]
            used.add(rel.lower())
            target = dest / rel
            target.parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(part, target)
            names.append(f"inputs/{rel}")
        result["inputs"][label] = {"path": f"inputs/{name}", "files": names}
    if plan_path is not None:
        shutil.copyfile(plan_path, dest / "plan.toml")
        result["plan"] = "inputs/plan.toml"
    return result


def demo_source() -> Path:
    """The packaged demo folder (plan.toml and its layers)."""
    return Path(str(resources.files("geosample") / "data" / "demo"))


def copy_demo(dest: Path) -> Path:
    """Copy the demo plan and layers into ``dest``; returns the plan path there."""
    src = demo_source()
    if not (src / "plan.toml").exists():
        raise InputFileError(f"the packaged demo is missing ({src}); reinstall geosample.")
    dest.mkdir(parents=True, exist_ok=True)
    for p in src.iterdir():
        if p.is_file() and p.suffix in (".toml", ".geojson", ".gpkg", ".json", ".md"):
            shutil.copy2(p, dest / p.name)
    return dest / "plan.toml"


def run_demo(out: str | Path, *, overwrite: bool = False,
             progress: Callable[[str], None] | None = None) -> PlanRun:
    """Run the packaged demo plan, with its inputs bundled into ``OUT/inputs/``.

    The design folder is then self-contained: ``geosample verify OUT`` checks it
    from the copies, and ``OUT/inputs/plan.toml`` is an example plan to edit.
    """
    out = Path(out)
    check_output(out, overwrite)
    with tempfile.TemporaryDirectory(prefix="geosample-demo-") as tmp:
        plan_path = copy_demo(Path(tmp))
        return run_plan(plan_path, out, overwrite=overwrite, progress=progress, record=False,
                        bundle_inputs=True)

