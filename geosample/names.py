"""Stratum names, normalised once where they enter (plan keys, strata and water layers).

A stratum name travels through schedule.csv, the map, the report and back in the
crew's results file. A name that a spreadsheet or an editor changes on the way (a
trailing space, a no-break space, a decomposed accent) no longer matches, and
``assess`` would then refuse complete results. So every name is normalised when
it is read:

- Unicode NFC (a composed "é", as most keyboards type it; Unicode Standard Annex #15);
- every space character (no-break space, thin space...) becomes a plain space,
  runs of spaces become one, and leading and trailing spaces are removed;
- control characters (line breaks, tabs, NUL) and line or paragraph separators
  are refused: a name is one line of text.

Two strata whose normalised names are equal, or differ only in letter case, are
refused by :func:`check_unique`.

>>> stratum_name("  North\\u00a0Basin ")
'North Basin'
>>> stratum_name("Cafe\\u0301 Bay") == "Caf\\u00e9 Bay"
True
"""
from __future__ import annotations

import re
import unicodedata
from typing import Iterable

from .errors import SettingError

__all__ = ["stratum_name", "check_unique"]

_SPACES = re.compile(r" {2,}")


def stratum_name(value: object, *, setting: str = "stratum name", where: str = "") -> str:
    """``value`` as a stratum name: NFC, one plain space between words, no control characters.

    Raises
    ------
    SettingError
        The name holds a control character or a line break, or is empty.
    """
    text = value.strip() if isinstance(value, str) else ("" if value is None else str(value).strip())
    if text and text.isascii() and text.isprintable() and "  " not in text:
        return text  # the common case, already normal: fast for a layer of a million lakes
    text = unicodedata.normalize("NFC", text).strip()
    bad = [c for c in text if unicodedata.category(c) in ("Cc", "Zl", "Zp")]
    if bad:
        kinds = sorted({("a line break" if c in "\n\r\u2028\u2029\x0b\x0c\x85" else
                         "a tab" if c == "\t" else f"the control character U+{ord(c):04X}") for c in bad})
        raise SettingError(setting, value, "a name on one line without control characters",
                           fix=f"the name holds {' and '.join(kinds)}{' (' + where + ')' if where else ''}: "
                               "retype it as one line of plain text")
    name = _SPACES.sub(" ", "".join(" " if unicodedata.category(c) == "Zs" else c for c in text))
    if not name:
        raise SettingError(setting, value, "a name with at least one visible character",
                           fix=f"give the stratum a name{' (' + where + ')' if where else ''}")
    return name


def check_unique(names: Iterable[tuple[str, str]], *, setting: str, fix: str) -> None:
    """Refuse two entries whose names are equal or differ only in letter case.

    ``names``: pairs ``(name, where)``, e.g. ``("West", "feature 2")``.
    """
    seen: dict[str, tuple[str, str]] = {}
    for name, where in names:
        key = name.casefold()
        if key in seen:
            first, first_where = seen[key]
            if first == name:
                detail = f"{first_where} and {where} are both named {name!r}"
            else:
                detail = f"{first_where} is named {first!r} and {where} {name!r}, which differ only in letter case"
            raise SettingError(setting, name, "a different name for every stratum", fix=f"{detail}; {fix}")
        seen[key] = (name, where)
