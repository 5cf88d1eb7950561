"""Seeds and random streams.

A design has one root seed (an integer, recorded in the manifest). Each part of
the draw takes its own stream, keyed by a name (``"space/North basin"``,
``"time"``), derived with :class:`numpy.random.SeedSequence` spawn keys. Keying
by name rather than by position means that adding, removing or renaming one
stratum leaves every other stratum's draw unchanged.
"""
from __future__ import annotations

import hashlib
import secrets

import numpy as np

__all__ = ["seed_from_text", "fresh_seed", "stream", "as_seed"]


def seed_from_text(text: str) -> int:
    """The seed announced as a text: the SHA-256 of its UTF-8 bytes, as a 256-bit integer.

    Publishing the text before the draw lets anyone check that nobody chose the
    seed after seeing the sites.

    Examples
    --------
    >>> seed_from_text("abc") % 1000
    965
    """
    return int.from_bytes(hashlib.sha256(text.encode("utf-8")).digest(), "big")


def fresh_seed() -> int:
    """A new 63-bit seed from the operating system's entropy source.

    63 bits fit a TOML integer, so the seed can be copied into a plan file.
    """
    return secrets.randbits(63)


def _key(name: str) -> tuple[int, ...]:
    digest = hashlib.sha256(name.encode("utf-8")).digest()
    return tuple(int.from_bytes(digest[i : i + 4], "big") for i in range(0, 16, 4))


def as_seed(seed: int | np.random.SeedSequence) -> np.random.SeedSequence:
    """Normalise an integer seed or a SeedSequence to a SeedSequence."""
    if isinstance(seed, np.random.SeedSequence):
        return seed
    if isinstance(seed, (int, np.integer)) and not isinstance(seed, bool) and seed >= 0:
        return np.random.SeedSequence(int(seed))
    raise TypeError(f"seed must be a non-negative integer or a SeedSequence, not {seed!r}")


def stream(seed: int | np.random.SeedSequence, name: str) -> np.random.Generator:
    """The Generator for the part of the draw called ``name``.

    The same ``(seed, name)`` always gives the same stream; different names give
    independent streams.

    Examples
    --------
    >>> a = stream(1, "space/North").random()
    >>> b = stream(1, "space/North").random()
    >>> a == b
    True
    >>> a == stream(1, "space/South").random()
    False
    """
    root = as_seed(seed)
    child = np.random.SeedSequence(root.entropy, spawn_key=tuple(root.spawn_key) + _key(name))
    return np.random.default_rng(child)
