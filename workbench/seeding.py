"""One seeding helper: every random stream derives from a root seed through SeedSequence."""

from __future__ import annotations

import zlib

import numpy as np

__all__ = ["MAX_SEED", "campaign_streams", "derive", "generator", "name_key"]

# The largest root seed: SeedSequence takes any non-negative integer, but the grid file keeps
# the seed as a signed 64-bit attribute (NetCDF), so a larger one could not be stored.
MAX_SEED = 2**63 - 1

# The named streams of one campaign, in the order they are spawned. Adding a name at the end
# keeps every earlier stream unchanged.
STREAMS = ("placement", "distortion", "design", "strategy", "noise")


def generator(
    seed: int | np.random.SeedSequence | np.random.Generator | None,
) -> np.random.Generator:
    """Turn a seed, a SeedSequence or a Generator into a Generator (a Generator passes through)."""
    if isinstance(seed, np.random.Generator):
        return seed
    return np.random.default_rng(seed)


def name_key(name: str) -> int:
    """A stable integer for a name (CRC-32), so seeds do not depend on the order of a list."""
    return zlib.crc32(name.encode("utf-8"))


def derive(root: int, *keys: int | str) -> np.random.SeedSequence:
    """The SeedSequence for ``keys`` below ``root``; names are turned into stable integers."""
    spawn_key = tuple(name_key(k) if isinstance(k, str) else int(k) for k in keys)
    return np.random.SeedSequence(entropy=int(root), spawn_key=spawn_key)


def campaign_streams(seed: np.random.SeedSequence) -> dict[str, np.random.Generator]:
    """The independent named streams of one campaign (see ``STREAMS``)."""
    # Built from the spawn key rather than ``seed.spawn``, which would mutate ``seed``.
    return {
        name: np.random.default_rng(
            np.random.SeedSequence(entropy=seed.entropy, spawn_key=(*seed.spawn_key, i))
        )
        for i, name in enumerate(STREAMS)
    }
