"""File-level workflows behind ``geosample plan`` and ``geosample demo``.

These are the edges: they read the plan and layers, call :func:`make_design`,
write the field package and the manifest into a temporary folder next to the
output, and rename it into place only when everything succeeded, so a failure
leaves nothing half-written. Every plan run appends a line to the plan's draw
record (``<plan>.draws.csv`` next to the plan file), so that re-drawing until
the sites look convenient shows in the manifest and the report.
"""
from __future__ import annotations

import csv
import datetime as dt
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

DRAW_RECORD_FIELDS = ("time_utc", "plan_sha256", "seed", "seed_source", "n_primary", "n_sites", "output")


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


def _append_draw(record: Path, row: dict) -> None:
    new = not record.exists()
    with open(record, "a", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=DRAW_RECORD_FIELDS, lineterminator="\n")
        if new:
            w.writeheader()
        w.writerow(row)


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
             bundle_inputs: bool = False) -> PlanRun:
    """Design from a plan file and write the field package and manifest into ``out``.

    Raises
    ------
    OutputExistsError
        ``out`` exists and ``overwrite`` is False (checked before any work).
    GeosampleError
        Any problem with the plan, the layers or the feasibility of the design.

    With ``bundle_inputs`` the plan and its layers are copied into ``out/inputs/``
    and the manifest points there, so the design folder alone can be verified.
    """
    from .audit import sha256_file, write_manifest
    from .design import load_layers, make_design, resolve_seed
    from .export import write_package
    from .plan import load_plan

    plan_path = Path(plan_path)
    out = Path(out)
    check_output(out, overwrite)
    plan = load_plan(plan_path)
    for w in plan.warnings:
        log.warning(w)
    layers = load_layers(plan)
    locations = plan.input_paths()
    inputs = {label: {"path": plan.input_names()[label], "sha256": sha256_file(p)} for label, p in locations.items()}
    seed, seed_source = resolve_seed(plan.settings)
    rec = draw_record_path(plan.path) if plan.path else None
    draws_before = count_draws(rec) if rec else 0
    design = make_design(plan, layers=layers, seed=seed, seed_source=seed_source, draw_count=draws_before + 1,
                         inputs=inputs, progress=progress)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", suffix=".partial", dir=out.parent))
    try:
        if progress:
            progress("writing the field package")
        files = write_package(design, tmp)
        if bundle_inputs:
            locations = _bundle(locations, plan.path, tmp / "inputs", out / "inputs")
        write_manifest(design, tmp, final_folder=out, plan_path=plan.path, plan_sha256=plan.sha256,
                       outputs={name: p for name, p in files.items()}, input_locations=locations)
        _swap_in(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    written = {name: out / Path(p).name for name, p in files.items()}
    written["manifest.json"] = out / "manifest.json"
    if rec and record:
        try:
            _append_draw(rec, {
                "time_utc": dt.datetime.now(dt.timezone.utc).replace(microsecond=0).isoformat(),
                "plan_sha256": plan.sha256, "seed": str(design.seed), "seed_source": design.seed_source,
                "n_primary": design.allocation.total, "n_sites": len(design.draw.sites), "output": str(out.resolve()),
            })
        except OSError as exc:
            log.warning("could not append to the draw record %s (%s); this draw is not recorded there", rec,
                        exc.strerror)
    # (the frame's warnings were logged by geometry as they arose)
    for w in tuple(design.draw.warnings) + tuple(design.schedule.warnings):
        log.warning(w)
    return PlanRun(design, out, written, rec)


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

