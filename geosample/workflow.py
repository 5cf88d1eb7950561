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

import csv
import hashlib
import logging
import shutil
import tempfile
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Callable

from .errors import InputFileError, OutputExistsError
from .model import Design

__all__ = ["run_plan", "run_demo", "PlanRun", "draw_record_path", "count_draws", "copy_demo"]

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


def check_output(out: Path, overwrite: bool) -> None:
    if out.exists() and not overwrite:
        raise OutputExistsError(
            f"output folder {str(out)!r} exists already. Choose another folder with -o, or add --overwrite "
            "to replace it."
        )
    if out.exists() and not out.is_dir():
        raise OutputExistsError(f"output {str(out)!r} is a file, not a folder. Choose another path with -o.")


def _swap_in(tmp: Path, out: Path) -> None:
    if out.exists():
        old = out.with_name(out.name + ".geosample-old")
        if old.exists():
            shutil.rmtree(old)
        out.rename(old)
        try:
            tmp.rename(out)
        except Exception:
            old.rename(out)
            raise
        shutil.rmtree(old)
    else:
        tmp.rename(out)


def run_plan(plan_path: str | Path, out: str | Path, *, overwrite: bool = False,
             progress: Callable[[str], None] | None = None, record: bool = True,
             bundle_inputs: bool = False, registration: str | Path | None = None,
             public_value: str | None = None) -> PlanRun:
    """Design from a plan file and write the field package and manifest into ``out``.

    Raises
    ------
    OutputExistsError
        ``out`` exists and ``overwrite`` is False (checked before any work).
    GeosampleError
        Any problem with the plan, the layers or the feasibility of the design.

    With ``bundle_inputs`` the plan and its layers are copied into ``out/inputs/``
    and the manifest points there, so the design folder alone can be verified.

    With ``registration`` (a file written by ``geosample register``) and
    ``public_value`` the seed is the registered one (:mod:`geosample.registration`);
    the plan and its layers must be the registered ones and the public date must
    have begun. The draw history (:mod:`geosample.history`) is read from every
    place it is kept, written into ``out/draws.csv`` and, with ``record``, appended
    to the per-user store and the record beside the plan, before ``out`` is swapped in.
    """
    from .audit import sha256_file, write_manifest
    from .design import load_layers, make_design, resolve_seed
    from .export import write_package
    from .plan import load_plan

    from . import history
    from . import registration as registry

    plan_path = Path(plan_path)
    out = Path(out)
    check_output(out, overwrite)
    reg = _read_registration(registration, public_value)
    plan = load_plan(plan_path)
    for w in plan.warnings:
        log.warning(w)
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
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", suffix=".partial", dir=out.parent))
    try:
        if progress:
            progress("writing the field package")
        files = write_package(design, tmp)
        files[history.FILE_NAME] = history.write_rows(rows, tmp / history.FILE_NAME)
        if reg is not None:
            files[registry.FILE_NAME] = _copy_registration(reg, tmp / registry.FILE_NAME)
        if bundle_inputs:
            locations = _bundle(locations, plan.path, tmp / "inputs", out / "inputs")
        write_manifest(design, tmp, final_folder=out, plan_path=plan.path, plan_sha256=plan.sha256,
                       outputs={name: p for name, p in files.items()}, input_locations=locations)
        if record:  # the history is written before the new folder is swapped in
            _record_draw(row, [history.store_path(layers_key)] + ([rec] if rec else []))
        _swap_in(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    written = {name: out / name for name in files}
    written["manifest.json"] = out / "manifest.json"
    # (the frame's warnings were logged by geometry as they arose)
    for w in tuple(design.draw.warnings) + tuple(design.schedule.warnings):
        log.warning(w)
    return PlanRun(design, out, written, rec)


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


def _bundle(locations: dict[str, Path], plan_path: Path | None, dest: Path, final: Path) -> dict[str, Path]:
    """Copy input files (with a Shapefile's side files) into ``dest``; paths as they will be in ``final``."""
    dest.mkdir(parents=True, exist_ok=True)
    out: dict[str, Path] = {}
    used: set[str] = set()
    for label, src in locations.items():
        src = Path(src)
        name = src.name
        if name in used:
            name = f"{label.replace('[', '_').replace(']', '')}_{name}"
        used.add(name)
        shutil.copy2(src, dest / name)
        if src.suffix.lower() == ".shp":
            for side in src.parent.glob(src.stem + ".*"):
                if side != src:
                    shutil.copy2(side, dest / (Path(name).stem + side.suffix))
        out[label] = final / name
    if plan_path is not None:
        shutil.copy2(plan_path, dest / "plan.toml")
    return out


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

