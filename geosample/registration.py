"""Registered draws: commit to the plan and the seed rule, then reveal a public value.

A seed written in a plan proves nothing about *when* it was chosen: it can be
the tenth seed tried. A registered draw closes that gap in two steps.

1. **Commit** (``geosample register PLAN.toml -o REGISTRATION.json``), before any
   draw: the registration file fixes the SHA-256 of the plan file and of every
   input layer, the content key of the plan (see :mod:`geosample.history`), and
   names a public random value that does not exist yet: its source (a published
   lottery result, a public randomness beacon...) and the date it will be
   published. The author hands the file to the regulator, who keeps it (or at
   least its SHA-256) before that date.
2. **Reveal** (``geosample plan PLAN.toml -o OUT --registration REGISTRATION.json
   --public-value TEXT``), after the date: the seed is computed from the
   registration's SHA-256 and the public value, by the rule below. Nobody could
   know the seed when the registration was fixed, and the registration cannot
   be changed afterwards without changing its SHA-256.

The seed rule (``SEED_RULE``), recomputable with any SHA-256 tool::

    message = "geosample-seed/1" LF D LF V        (UTF-8 bytes, no final LF)
    seed    = SHA-256(message), read as a 256-bit big-endian unsigned integer

where ``D`` is the SHA-256 of the registration file's bytes, exactly as
written, in 64 lower-case hexadecimal digits (what ``sha256sum REGISTRATION.json``
prints), ``V`` the public value after Unicode NFC normalisation with leading
and trailing white space removed, and ``LF`` the byte 0x0A. In a POSIX shell::

    D=$(sha256sum REGISTRATION.json | cut -c1-64)
    printf 'geosample-seed/1\\n%s\\n%s' "$D" "$V" | sha256sum

gives the seed in hexadecimal (the manifest records it in decimal).

This module is an edge (it reads and writes registration files); the rule
itself is the pure functions :func:`public_value`, :func:`seed_message` and
:func:`registered_seed`.
"""
from __future__ import annotations

import datetime as dt
import hashlib
import json
import unicodedata
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .errors import GeosampleError, InputFileError, OutputExistsError, RegistrationError, SettingError

__all__ = ["FORMAT", "SEED_RULE", "SEED_TAG", "FILE_NAME", "Registration", "public_value", "seed_message",
           "registered_seed", "registration_data", "registration_bytes", "write_registration",
           "read_registration", "check_plan", "check_public_date", "check_manifest", "check_against",
           "manifest_entry", "earliest_start", "printable", "utcnow"]

FORMAT = "geosample-registration/1"
SEED_TAG = "geosample-seed/1"
#: The copy of the registration inside a design folder.
FILE_NAME = "registration.json"
SEED_RULE = (
    'seed = SHA-256 of the UTF-8 bytes of "geosample-seed/1" + LF + D + LF + V (no final LF), read as a '
    "256-bit big-endian unsigned integer; D = SHA-256 of this registration file's bytes exactly as written, "
    "64 lower-case hex digits; V = the public value, Unicode NFC, leading and trailing white space removed"
)
#: The earliest time zone in use (UTC+14): a date has begun somewhere on Earth once it has begun there.
_EARLIEST_ZONE = dt.timezone(dt.timedelta(hours=14))


def utcnow() -> dt.datetime:
    """The computer's clock in UTC (one place, so tests can set it)."""
    return dt.datetime.now(dt.timezone.utc)


def earliest_start(date: dt.date) -> dt.datetime:
    """The first moment ``date`` exists anywhere on Earth (its midnight at UTC+14), in UTC."""
    return dt.datetime.combine(date, dt.time(0, 0), tzinfo=_EARLIEST_ZONE).astimezone(dt.timezone.utc)


# --------------------------------------------------------------------------- the seed rule (pure)
def public_value(text: str, *, what: str = "--public-value") -> str:
    """The public value as the seed rule uses it: NFC, ends trimmed; refuses empty text and control characters.

    >>> public_value("  12 34 56  ")
    '12 34 56'
    >>> public_value("Cafe\\u0301") == "Caf\\u00e9"
    True
    """
    if not isinstance(text, str):
        raise SettingError(what, text, "a text", fix="type the value exactly as the source published it")
    v = unicodedata.normalize("NFC", text).strip()
    if not v:
        raise SettingError(what, text, "the public value as published (not empty)",
                           fix="type the value the registration's source published on its date")
    bad = [c for c in v if unicodedata.category(c) in ("Cc", "Cf", "Zl", "Zp")]
    if bad:
        raise SettingError(what, printable(v), "one line of printable text (no control or format characters)",
                           fix=f"remove the character {bad[0]!r}; type the value as one line")
    return v


def seed_message(digest: str, value: str) -> bytes:
    """The bytes the seed is the SHA-256 of (see the module docstring)."""
    if len(digest) != 64 or any(c not in "0123456789abcdef" for c in digest):
        raise ValueError(f"registration digest must be 64 lower-case hex digits, not {digest!r}")
    return f"{SEED_TAG}\n{digest}\n{public_value(value)}".encode("utf-8")


def registered_seed(digest: str, value: str) -> int:
    """The seed of a registered draw: SHA-256 of :func:`seed_message` as a big-endian integer."""
    return int.from_bytes(hashlib.sha256(seed_message(digest, value)).digest(), "big")


def printable(text: Any) -> str:
    """Untrusted text for a terminal or report: control and format characters escaped as ``\\xNN``/``\\uNNNN``.

    >>> printable("a\\x1b[31mb")
    'a\\\\x1b[31mb'
    """
    return "".join(c.encode("unicode_escape").decode("ascii") if unicodedata.category(c) in ("Cc", "Cf", "Zl", "Zp")
                   else c for c in str(text))


# --------------------------------------------------------------------------- the registration file
@dataclass(frozen=True)
class Registration:
    """A registration as read from its file.

    Attributes
    ----------
    path : Path
    sha256 : str
        SHA-256 of the file's bytes (``D`` of the seed rule).
    plan_sha256 : str
    inputs : dict
        Input label -> SHA-256 of the layer file.
    content_sha256 : str
        The plan's content key (:func:`geosample.history.content_key`).
    public_source : str
    public_date : datetime.date
    data : dict
        The whole file.
    """

    path: Path
    sha256: str
    plan_sha256: str
    inputs: dict
    content_sha256: str
    public_source: str
    public_date: dt.date
    data: dict


def registration_data(*, plan_name: str, plan_sha256: str, inputs: dict[str, dict], content_sha256: str,
                      title: str, public_source: str, public_date: dt.date, made: dt.datetime) -> dict:
    """The registration as a dict (pure). ``inputs``: label -> {"file": as written, "sha256": hex}."""
    from .version import __version__

    return {
        "format": FORMAT,
        "survey_title": title,
        "plan": {"file": plan_name, "sha256": plan_sha256},
        "inputs": {k: {"file": v["file"], "sha256": v["sha256"]} for k, v in sorted(inputs.items())},
        "content_sha256": content_sha256,
        "public_value": {"source": public_source, "date": public_date.isoformat()},
        "seed_rule": SEED_RULE,
        "made_utc": made.astimezone(dt.timezone.utc).replace(microsecond=0).isoformat(),
        "made_utc_note": "the clock of the computer that wrote this file; it proves nothing. What shows the "
                         "registration came first is that the regulator received it before the public date.",
        "geosample_version": __version__,
    }


def registration_bytes(data: dict) -> bytes:
    """The file's bytes: JSON, sorted keys, two-space indent, UTF-8, final newline."""
    return (json.dumps(data, indent=2, sort_keys=True, ensure_ascii=False) + "\n").encode("utf-8")


def _parse_date(text: str, what: str) -> dt.date:
    try:
        return dt.date.fromisoformat(str(text).strip())
    except ValueError:
        raise SettingError(what, text, "a date written YYYY-MM-DD", fix="write the date like 2027-05-03") from None


def write_registration(plan_path: str | Path, out: str | Path, *, public_source: str, public_date: str | dt.date,
                       now: dt.datetime | None = None, progress: Any = None) -> Registration:
    """Register a plan: write ``out`` (refused if it exists) and return it as read back.

    The plan is first designed once with a throwaway seed (nothing shown or kept), so that a
    plan that cannot be drawn (an infeasible size, a broken layer) is refused before it is
    registered.

    Raises
    ------
    SettingError
        The source is empty, the date is not after today everywhere on Earth, or the
        plan fixes ``draw.seed`` / ``draw.seed_text``.
    OutputExistsError
        ``out`` exists (a registration is never replaced: it may already be with the regulator).
    GeosampleError
        Any problem with the plan or its layers.
    """
    from .audit import sha256_file
    from .history import content_key
    from .plan import load_plan

    out = Path(out)
    now = now or utcnow()
    source = unicodedata.normalize("NFC", str(public_source)).strip()
    if not source or any(unicodedata.category(c) in ("Cc", "Cf", "Zl", "Zp") for c in source):
        raise SettingError("--public-source", printable(public_source),
                           "one line naming where and how the value will be published",
                           fix='e.g. --public-source "national lottery main draw, the six numbers in draw order"')
    date = public_date if isinstance(public_date, dt.date) else _parse_date(public_date, "--public-date")
    if earliest_start(date) <= now:
        raise SettingError(
            "--public-date", date.isoformat(),
            f"a date that has not begun anywhere on Earth yet (by this computer's clock it is now "
            f"{now.astimezone(dt.timezone.utc):%Y-%m-%d %H:%M} UTC, so the earliest is "
            f"{(now.astimezone(_EARLIEST_ZONE).date() + dt.timedelta(days=1)).isoformat()})",
            fix="name a value that will be published later: a value that may exist already could be known "
                "when you register, and then the registration shows nothing")
    if out.exists() or out.is_symlink():
        raise OutputExistsError(
            f"registration file {str(out)!r} exists already. A registration is never replaced (it may be with the "
            "regulator already); choose another file name with -o.")
    if out.suffix.lower() == ".toml":
        raise SettingError("-o", str(out), "a new .json file for the registration",
                           fix="write it to e.g. REGISTRATION.json; a .toml name invites confusion with the plan")
    plan = load_plan(plan_path)
    _refuse_fixed_seed(plan.settings, str(plan_path), "register")
    names = plan.input_names()
    inputs = {}
    for label, p in plan.input_paths().items():
        if not Path(p).is_file():
            raise InputFileError(f"input {label} ({names[label]!r} in {str(plan_path)!r}) does not exist or is not "
                                 "a file. Fix the path in the plan before registering it.")
        inputs[label] = {"file": names[label], "sha256": sha256_file(p)}
    _trial(plan, progress)
    data = registration_data(
        plan_name=Path(plan_path).name, plan_sha256=plan.sha256, inputs=inputs,
        content_sha256=content_key(plan.settings, {k: v["sha256"] for k, v in inputs.items()}),
        title=plan.settings["survey"].get("title") or "", public_source=source, public_date=date, made=now)
    out.parent.mkdir(parents=True, exist_ok=True)
    try:
        with open(out, "xb") as fh:
            fh.write(registration_bytes(data))
    except FileExistsError:
        raise OutputExistsError(f"registration file {str(out)!r} exists already; choose another name with -o.") \
            from None
    except OSError as exc:
        raise InputFileError(f"cannot write the registration {str(out)!r}: {exc.strerror}. Choose a folder you "
                             "can write to.") from None
    return read_registration(out)


def _trial(plan: Any, progress: Any = None) -> None:
    """Make the design once with a throwaway seed, so a plan that cannot be drawn is refused now.

    The trial's sites are neither shown nor kept nor recorded, and say nothing about the
    registered draw, whose seed depends on a value that does not exist yet.
    """
    from .design import load_layers, make_design

    make_design(plan, layers=load_layers(plan), seed=0, seed_source="os", progress=progress)


def _refuse_fixed_seed(settings: dict, source: str, command: str) -> None:
    draw = settings.get("draw", {})
    for key in ("seed", "seed_text"):
        if draw.get(key) is not None:
            raise SettingError(
                f"draw.{key}", draw[key], f"no {key} in a plan drawn with a registration",
                fix=f"remove draw.{key} from {source}: with a registration the seed comes from the registration "
                    "and the public value, and a seed fixed in the plan would be a second, competing seed"
                    + (" (then register the plan again: its SHA-256 changes)" if command == "plan" else ""))


def _bad(path: Path, what: str, fix: str = "use the registration file exactly as 'geosample register' wrote it "
                                          "(the copy the regulator holds)") -> RegistrationError:
    return RegistrationError(f"registration file {str(path)!r}: {what}. Fix: {fix}.")


def read_registration(path: str | Path) -> Registration:
    """Read and check a registration file; every problem is a :class:`RegistrationError` naming the file."""
    path = Path(path)
    if not path.exists():
        raise InputFileError(f"registration file {str(path)!r} does not exist. Give the file 'geosample register' "
                             "wrote (the regulator holds a copy).")
    if not path.is_file():
        raise InputFileError(f"registration file {str(path)!r} is not a regular file. Give the .json file "
                             "'geosample register' wrote.")
    size = path.stat().st_size
    if size > 1_000_000:
        raise _bad(path, f"{size} bytes is far more than a registration holds")
    raw = path.read_bytes()
    try:
        data = json.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise _bad(path, f"not JSON text ({printable(exc)})") from None
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        got = data.get("format") if isinstance(data, dict) else type(data).__name__
        raise _bad(path, f"format is {printable(got)!r}, not {FORMAT!r}; it is not a registration")
    try:
        plan = data["plan"]
        inputs = {str(k): str(v["sha256"]) for k, v in data["inputs"].items()}
        pv = data["public_value"]
        source, date_text = str(pv["source"]), str(pv["date"])
        plan_sha, content = str(plan["sha256"]), str(data["content_sha256"])
    except (KeyError, TypeError, AttributeError) as exc:
        raise _bad(path, f"the entry {printable(exc)} is missing or malformed") from None
    for name, h in [("plan.sha256", plan_sha), ("content_sha256", content)] + [
            (f"inputs.{k}.sha256", v) for k, v in inputs.items()]:
        if len(h) != 64 or any(c not in "0123456789abcdef" for c in h):
            raise _bad(path, f"{name} is {printable(h)!r}, not a SHA-256 (64 lower-case hex digits)")
    try:
        date = dt.date.fromisoformat(date_text)
    except ValueError:
        raise _bad(path, f"public_value.date is {printable(date_text)!r}, not a date YYYY-MM-DD") from None
    return Registration(path=path, sha256=hashlib.sha256(raw).hexdigest(), plan_sha256=plan_sha, inputs=inputs,
                        content_sha256=content, public_source=source, public_date=date, data=data)


# --------------------------------------------------------------------------- checks at draw time
def check_public_date(reg: Registration, now: dt.datetime | None = None) -> None:
    """Refuse to draw before the registration's public date has begun anywhere on Earth.

    There is no override: the only honest reason to draw earlier would be a wrong
    clock, and the fix for that is to set the clock right.
    """
    now = now or utcnow()
    if now < earliest_start(reg.public_date):
        raise RegistrationError(
            f"registration file {str(reg.path)!r} names a public value published on {reg.public_date} "
            f"({printable(reg.public_source)}); by this computer's clock "
            f"({now.astimezone(dt.timezone.utc):%Y-%m-%d %H:%M} UTC) that date has not begun anywhere on Earth, so the value cannot be known yet. Fix: wait "
            "until the value is published, then type it with --public-value; if the clock is wrong, set it right.")


def check_plan(reg: Registration, plan: Any, inputs: dict[str, str], *, plan_path: str | Path) -> None:
    """Refuse a plan or input layer that differs from the registered ones, or a plan that fixes its own seed.

    ``inputs``: label -> SHA-256 of the layer files as they are now.
    """
    where = f"registration file {str(reg.path)!r}"
    if plan.sha256 != reg.plan_sha256:
        raise RegistrationError(
            f"the plan {str(plan_path)!r} is not the registered one: its SHA-256 is {plan.sha256}, {where} holds "
            f"{reg.plan_sha256}. Fix: draw with the plan file exactly as registered (any edit, even a comment, "
            "changes it); a changed plan needs a new registration with a public value of a later date.")
    for label in sorted(set(reg.inputs) | set(inputs)):
        a, b = inputs.get(label), reg.inputs.get(label)
        if a != b:
            now = "absent" if a is None else f"SHA-256 {a}"
            was = "absent" if b is None else f"SHA-256 {b}"
            raise RegistrationError(
                f"input {label} of the plan {str(plan_path)!r} is not the registered one: now {now}, {where} holds "
                f"{was}. Fix: restore the registered layer file; a changed layer needs a new registration with a "
                "public value of a later date.")
    _refuse_fixed_seed(plan.settings, str(plan_path), "plan")


def manifest_entry(reg: Registration, value: str) -> dict:
    """The manifest's ``registration`` key for a registered draw."""
    return {"sha256": reg.sha256, "public_source": reg.public_source, "public_date": reg.public_date.isoformat(),
            "public_value": public_value(value), "content_sha256": reg.content_sha256, "file": FILE_NAME,
            "seed_rule": SEED_RULE}


# --------------------------------------------------------------------------- checks in verify
def check_manifest(folder: str | Path, manifest: dict) -> list[str]:
    """Differences between a registered design's manifest and its own registration entry (empty: consistent).

    Checks that the manifest's seed is what the recorded registration digest and
    public value give, that the registration copy in the folder has that digest,
    and that the registered plan and input hashes are the manifest's. An
    unregistered design (``registration`` null or absent) gives no difference.
    """
    entry = manifest.get("registration")
    if not entry:
        return []
    if not isinstance(entry, dict):
        return ["manifest: registration is not a table of values"]
    diffs: list[str] = []
    digest, value = str(entry.get("sha256", "")), entry.get("public_value")
    try:
        expected = registered_seed(digest, value)
    except (ValueError, GeosampleError):
        return [f"manifest: the registration entry cannot give a seed (digest {printable(digest)!r}, public value "
                f"{printable(value)!r})"]
    if str(manifest.get("seed")) != str(expected):
        diffs.append(f"seed {printable(manifest.get('seed'))} is not the one the registration {digest[:12]}... and the "
                     f"public value {printable(value)!r} give ({expected})")
    if manifest.get("seed_source") != "registered":
        diffs.append(f"seed_source is {printable(manifest.get('seed_source'))!r}, not 'registered', in a registered "
                     "design")
    name = str(entry.get("file", FILE_NAME))
    if Path(name).name != name or name in ("", ".", "..") or "\\" in name:
        return diffs + [f"manifest: registration file name {printable(name)!r} is not a plain file name"]
    copy = Path(folder) / name
    try:
        reg = read_registration(copy)
    except Exception as exc:  # a damaged copy is a difference, not a crash
        return diffs + [f"the registration copy {copy.name} in the design folder: {printable(exc)}"]
    diffs += check_against(manifest, reg)
    return diffs


def check_against(manifest: dict, reg: Registration) -> list[str]:
    """Differences between a design's manifest and a registration (the regulator's copy, or the folder's)."""
    entry = manifest.get("registration")
    if not isinstance(entry, dict) or not entry:
        return ["this draw was not registered: the manifest has no registration, so nothing shows that its seed "
                "was fixed before the sites were seen"]
    diffs: list[str] = []
    if entry.get("sha256") != reg.sha256:
        diffs.append(f"the design was drawn under registration {printable(entry.get('sha256'))}, not under "
                     f"{reg.path.name} (SHA-256 {reg.sha256})")
    plan = manifest.get("plan") if isinstance(manifest.get("plan"), dict) else {}
    if plan.get("sha256") != reg.plan_sha256:
        diffs.append(f"plan: the design's plan has SHA-256 {printable(plan.get('sha256'))}, the registration holds "
                     f"{reg.plan_sha256}")
    given = manifest.get("inputs") if isinstance(manifest.get("inputs"), dict) else {}
    got = {str(k): v.get("sha256") if isinstance(v, dict) else None for k, v in given.items()}
    for label in sorted(set(got) | set(reg.inputs)):
        if got.get(label) != reg.inputs.get(label):
            diffs.append(f"input {printable(label)}: the design's layer has SHA-256 {printable(got.get(label))}, "
                         f"the registration holds {reg.inputs.get(label)}")
    if entry.get("public_source") != reg.public_source or entry.get("public_date") != reg.public_date.isoformat():
        diffs.append("the public value's source or date in the manifest differ from the registration's")
    try:
        expected = registered_seed(reg.sha256, entry.get("public_value"))
    except (ValueError, GeosampleError):
        diffs.append(f"the manifest's public value {printable(entry.get('public_value'))!r} is not a usable value")
    else:
        if str(manifest.get("seed")) != str(expected):
            diffs.append(f"seed {printable(manifest.get('seed'))} is not the one {reg.path.name} and the public value "
                         f"{printable(entry.get('public_value'))!r} give ({expected})")
    return diffs

