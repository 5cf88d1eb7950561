"""``geosample verify OUT``: re-derive a design and compare it with what is in OUT."""
from __future__ import annotations

from pathlib import Path

import click

from . import cli as group
from ._common import command, echo_json


@command(group, "verify", short_help="Re-derive a design from its manifest and inputs; list any difference.")
@click.argument("out", metavar="OUT", type=click.Path(path_type=Path))
@click.option("--registration", type=click.Path(path_type=Path), default=None, metavar="REGISTRATION.json",
              help="Also check the draw against this registration (the copy the regulator kept).")
@click.option("--public-value", default=None, metavar="TEXT",
              help="The value you found published at the registration's source; checked against the one used.")
@click.option("--inputs", "inputs_dir", type=click.Path(path_type=Path), default=None, metavar="DIR",
              help="Only for a design written with --no-bundle-inputs: the folder holding its plan file and "
                   "layers (verify otherwise reads nothing outside OUT).")
@click.option("--json", "as_json", is_flag=True, help="Print the result as JSON.")
def verify_command(out: Path, registration: Path | None, public_value: str | None, inputs_dir: Path | None,
                   as_json: bool) -> None:
    """Re-run the design recorded in OUT/manifest.json from the plan and layers
    bundled in OUT/inputs/, with the recorded seed, and compare everything a
    reader may be shown: every file in OUT is listed by the manifest with its
    SHA-256, every site and time, every figure of the manifest, every output
    re-written byte for byte. Check the draw history in OUT/draws.csv against the
    manifest, and for a registered draw that the seed is the one its
    registration and public value give.

    With --registration, also check that the draw was made under that
    registration file: its SHA-256, the plan and layer hashes it fixed, and the
    seed it gives with the recorded public value. The public value and its source
    are printed: check at the source that this value was published on that date,
    or give the value you found there with --public-value to have it compared.

    Exit code 0 and "verified" only if everything matches; exit code 1 with each
    difference listed otherwise (a file added, an input or the plan changed, a
    site moved, a figure or an output edited, another seed); exit code 2 when OUT
    or the registration file cannot be checked (no manifest, a damaged one, a
    design too large to re-run). Library versions that differ from the
    manifest's are reported ("made with other library versions"); a page that is
    the same design rendered with another library version is reported as such.
    Text from the files is printed with control characters escaped.
    """
    from .. import history
    from .. import registration as registry
    from ..audit import read_manifest, verify
    from ..verifier import printable
    from ._progress import steps

    reg = registry.read_registration(registration) if registration is not None else None
    found = registry.public_value(public_value) if public_value is not None else None
    with steps("geosample verify") as progress:
        result = verify(out, progress=progress, inputs_dir=inputs_dir)
    manifest = read_manifest(out)
    extra = history.check_package(out, manifest) + registry.check_manifest(out, manifest)
    if reg is not None:
        extra += [d for d in registry.check_against(manifest, reg) if d not in extra]
    if found is not None:
        used = (manifest.get("registration") or {}).get("public_value") if isinstance(
            manifest.get("registration"), dict) else None
        if used is None:
            extra.append("--public-value was given, but this draw was not registered: it used no public value")
        elif used != found:
            extra.append(f"the draw used the public value {registry.printable(used)!r}, not {found!r} (the value "
                         "given with --public-value): its seed is not the one the published value gives")
    differences = list(result.differences) + [printable(d, 400) for d in extra]
    ok = result.ok and not extra
    entry = manifest.get("registration") if isinstance(manifest.get("registration"), dict) else None
    where = printable(out)
    if as_json:
        echo_json({"verified": ok, "differences": differences, "checked": result.checked,
                   "notes": list(result.notes), "other_library_versions": list(result.other_libraries),
                   "rendered_with_other_library_versions": list(result.rendered_elsewhere),
                   "registered": bool(entry), "registration": entry,
                   "checked_against_registration": str(registration) if reg else None})
    else:
        if ok:
            c = result.checked
            click.echo(f"verified: {c.get('sites', 0)} sites and times, {c.get('inputs', 0)} input layers, the plan "
                       f"and {c.get('outputs', 0)} output files match the manifest in {where}/, and the folder "
                       "holds nothing else")
            if result.other_libraries:
                click.echo("  made with other library versions (the design re-derives the same; listed for the "
                           "reader):")
                for n in result.other_libraries:
                    click.echo(f"    {n}")
            for n in result.notes:
                if not n.startswith("made with other library versions"):
                    click.echo(f"  note: {n}")
        else:
            click.echo(f"NOT verified: {len(differences)} difference(s) in {where}/", err=True)
            for d in differences:
                click.echo(f"  - {d}", err=True)
            for n in result.notes:
                click.echo(f"  note: {n}", err=True)
        _registration_lines(entry, reg, found, ok)
    if not ok:
        raise SystemExit(1)


def _registration_lines(entry: dict | None, reg, found: str | None, ok: bool) -> None:
    from ..registration import printable

    if not entry:
        click.echo("  This draw was not registered: nothing shows that its seed was chosen before the sites were "
                   "seen.")
        return
    click.echo(f"  Registered draw: public value \"{printable(entry.get('public_value'))}\" from "
               f"{printable(entry.get('public_source'))}, published on {printable(entry.get('public_date'))}.")
    if ok and found is not None:
        click.echo("  It is the value given with --public-value.")
    else:
        click.echo("  Check at that source that it published exactly this value on that date.")
    if reg is not None and ok:
        click.echo(f"  The seed, the plan and the input layers are the ones {reg.path} (SHA-256 "
                   f"{reg.sha256[:16]}...) registered; check that the regulator received it before that date.")
    elif reg is None:
        click.echo("  Checked against the registration copy in the folder only; give the regulator's copy with "
                   "--registration to check against it.")
