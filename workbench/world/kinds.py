"""Landscapes from the user's world, beside the textbook ones: drawn, fitted and function.

Each kind builds, per replicate, a :class:`~workbench.world.landscapes.Landscape` whose native
domain is the unit cube of the study's space, so placement, regret and severity work as for
the textbook functions:

- **drawn**: a random response surface from a Gaussian-process prior with a Matérn kernel
  (smoothness ν ∈ {1/2, 3/2, 5/2}, length scale per parameter or one for all, as fractions of
  the range), realised by random Fourier features (:mod:`.surfaces`); a new surface per
  replicate. Its minimum is found by :func:`.surfaces.global_minimum`.
- **fitted**: one draw per replicate from the posterior of a GP fitted to earlier evaluations
  (ARD Matérn 5/2 on cube coordinates, hyper-parameters by maximum marginal likelihood with
  :func:`workbench.gp.fit`), by pathwise conditioning: plausible versions of the team's real
  response. The truth stays where the data put it. With ``warp`` the GP models the data's
  normal scores and draws are mapped back through their empirical quantile function.
- **likedata** (:mod:`.likeness`): GP-prior surfaces drawn like earlier evaluations, their
  hyper-parameters from the posterior given the data, warped like the data; cut around their
  placement as drawn surfaces are.
- **function**: the user's own function of the parameters in user units, imported from a
  file by path (in every worker process); an exception or a non-finite value is a failed
  evaluation. Its minimum is given, or estimated by the same search (and marked estimated).
"""

from __future__ import annotations

import hashlib
import math
import time
from dataclasses import dataclass, field
from functools import cache
from pathlib import Path

import numpy as np

from .. import gp

# InputError only in find_function: it checks the user's 'FILE.py:FUNCTION' text under the
# key and file the parser passes in (importing the file is this module's job, so it lives here).
from ..validation import InputError, raw
from . import isolation, likeness, surfaces
from .history import fit_to_rows, fitting_fields
from .landscapes import Landscape
from .space import Space

__all__ = [
    "KINDS",
    "Drawn",
    "Fitted",
    "FunctionError",
    "UserFunction",
    "file_digest",
    "find_function",
]

KINDS = ("textbook", "drawn", "fitted", "function", "likedata", "table")
# What the minimum search of a user's function sees where it fails: large, finite.
_FAILED = np.finfo(float).max / 4


def _cube_landscape(name, dim, function, minimum, minimiser, source) -> Landscape:
    return Landscape(
        name=name,
        dim=dim,
        lower=(0.0,) * dim,
        upper=(1.0,) * dim,
        minimum=float(minimum),
        minimisers=(tuple(float(v) for v in minimiser),),
        source=source,
        function=function,
    )


@dataclass(frozen=True)
class Drawn:
    """A GP-prior surface of the study's dimension; ``length_scale`` one value or one per
    parameter (fractions of the range); ``features`` random Fourier features."""

    smoothness: float = 2.5
    length_scale: tuple[float, ...] = (0.2,)
    features: int = surfaces.DEFAULT_FEATURES
    kind: str = field(default="drawn", init=False)
    placed_at_belief: bool = field(default=True, init=False)

    def landscape(
        self, name: str, dim: int, rng: np.random.Generator, at: tuple | None = None
    ) -> Landscape:
        """A new surface from ``rng``; with ``at`` (a cube point), the window of the surface
        whose global minimum sits at ``at``.

        A drawn surface is defined everywhere, so a window of the unit cube's size can be cut
        anywhere (:func:`.surfaces.window_minimum`); the landscape's native domain is that
        window.
        """
        scale = self.length_scale if len(self.length_scale) > 1 else self.length_scale * dim
        surface = surfaces.draw_prior(dim, self.smoothness, np.array(scale), rng, self.features)
        lower, u, value = surfaces.window_minimum(surface, dim, rng, at)
        source = (
            f"a GP-prior draw (Matérn ν = {self.smoothness:g}, length scale "
            f"{', '.join(f'{v:g}' for v in self.length_scale)}, {self.features} random features)"
        )
        return Landscape(
            name=name,
            dim=dim,
            lower=tuple(lower.tolist()),
            upper=tuple((lower + 1.0).tolist()),
            minimum=float(value),
            minimisers=(tuple(float(v) for v in u),),
            source=source,
            function=surface,
        )

    @property
    def minimum_estimated(self) -> bool:
        return True


@dataclass(frozen=True)
class Fitted:
    """Posterior draws of a GP fitted to earlier evaluations (cube points ``X``, values to
    minimise ``y``); ``noise_sd`` the data's noise in response units, or None to estimate it.

    With ``warp`` the GP is fitted to the data's normal scores and each draw is mapped back by
    the data's empirical quantile function (:class:`.likeness.Warp`), so flat failing regions
    and saturation in the data appear in the draws; a given ``noise_sd`` is converted to
    normal-score units by the ratio sd(scores) / sd(y)."""

    X: tuple[tuple[float, ...], ...]
    y: tuple[float, ...]
    source: str
    noise_sd: float | None = None
    features: int = surfaces.DEFAULT_FEATURES
    digest: str = ""
    response: str = ""
    goal: str = "minimise"
    warp: bool = False
    kind: str = field(default="fitted", init=False)
    placed_at_belief: bool = field(default=False, init=False)

    @property
    def minimum_estimated(self) -> bool:
        return True

    @classmethod
    def from_history(cls, history, **options) -> Fitted:
        """From earlier evaluations (a :class:`workbench.world.history.History`)."""
        return cls(**fitting_fields(history), **options)

    def _modelled(self) -> tuple[tuple[float, ...], float | None]:
        """The values the GP sees and their noise sd: the data, or their normal scores."""
        if not self.warp:
            return self.y, self.noise_sd
        scores = likeness.normal_scores(self.y)
        noise = self.noise_sd
        if noise is not None:
            noise = noise * float(np.std(scores)) / (float(np.std(self.y)) or 1.0)
        return tuple(scores.tolist()), noise

    def model(self) -> gp.GP:
        """The GP fitted to the data (deterministic: the fit's restarts use a fixed seed)."""
        return _fit(self.X, *self._modelled())

    def surface(self, rng: np.random.Generator):
        """One posterior draw given the data (pathwise conditioning); with ``warp``, a
        :class:`.likeness.LikeSurface` whose ``latent`` is the draw in normal-score units."""
        model = self.model()
        h = model.hyperparameters
        scale = model.y_scale
        draw = surfaces.draw_posterior(
            np.array(self.X),
            np.array(self._modelled()[0]),
            length_scale=np.asarray(h.lengthscales),
            amplitude=math.sqrt(h.signal_variance) * scale,
            noise_variance=h.noise_variance * scale**2,
            mean=model.y_mean,
            smoothness=2.5,
            rng=rng,
            n_features=self.features,
        )
        if not self.warp:
            return draw
        return likeness.LikeSurface(draw, likeness.Warp.from_data(self.y))

    def _minimum(self, surface, dim, rng, n_dense=None):
        """Argmin and minimum of a draw; a warped one is searched on its smooth latent surface
        (the monotone warp keeps the argmin) and valued through the warp."""
        if not self.warp:
            return surfaces.global_minimum(surface, dim, rng, n_dense)
        u, _ = surfaces.global_minimum(surface.latent, dim, rng, n_dense)
        return u, float(surface(u[None, :])[0])

    def optima(self, draws: int, rng: np.random.Generator, n_dense: int = 2**12) -> np.ndarray:
        """Where the optimum lies in ``draws`` posterior draws: their argmins, (draws, d)."""
        dim = len(self.X[0])
        out = [self._minimum(self.surface(rng), dim, rng, n_dense)[0] for _ in range(draws)]
        return np.array(out)

    def landscape(self, name: str, dim: int, rng: np.random.Generator) -> Landscape:
        surface = self.surface(rng)
        u, value = self._minimum(surface, dim, rng)
        return _cube_landscape(
            name, dim, surface, value, u, f"a GP-posterior draw given {self.source}"
        )


@cache
def _fit(X: tuple, y: tuple, noise_sd: float | None) -> gp.GP:
    X, y = np.array(X, dtype=float), np.array(y, dtype=float)
    bounds = gp.DEFAULT_BOUNDS
    if noise_sd is not None:
        # A given noise is fixed: the bounds of its variance (standardised units) close on it.
        scale = float(np.std(y)) or 1.0
        v = max((noise_sd / scale) ** 2, gp.NOISE_VARIANCE_BOUNDS[0])
        bounds = gp.Bounds(bounds.lengthscale, bounds.signal_variance, (v, v * (1 + 1e-12)))
    return fit_to_rows(X, y, rng=np.random.default_rng(0), restarts=4, bounds=bounds)


# --------------------------------------------------------------------------- function


def file_digest(path: str) -> str:
    """A short SHA-256 of a file's bytes."""
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()[:16]


def find_function(reference: str, study_dir: Path, where: str, key: str):
    """``FILE.py:FUNCTION`` → (absolute path, function name), checked: the file exists, imports
    and defines a callable of that name."""
    if not isinstance(reference, str) or ":" not in reference:
        raise InputError(key, "'FILE.py:FUNCTION'", reference, where)
    file, name = reference.rsplit(":", 1)
    path = (study_dir / file).resolve()
    if not path.is_file():
        raise InputError(key, "an existing Python file", raw(f"no file at {path}"), where)
    # Imported in a child process, as every evaluation is: an import that raises, exits or
    # crashes is one line here, and the user's code never runs in this process.
    child = isolation.Evaluator(str(path), name, (), isolation.DEFAULT_TIME_LIMIT)
    try:
        failed = child._start()
        found = failed is None and child.signature.found
    finally:
        child.close()
    if failed is not None:
        raise InputError(key, "a file that imports", raw(failed), where)
    if not found:
        raise InputError(key, f"a function defined in {file}", raw(f"no function {name!r}"), where)
    return str(path), name


def _evaluations(
    U: np.ndarray, path: str, name: str, space: Space, sign: float, time_limit: float
) -> tuple[np.ndarray, list[str | None]]:
    """The user's function at cube points U (user units in), each evaluated in this process's
    child (:mod:`.isolation`): values (NaN where it failed) and why each failed (or None)."""
    points = [space.format_point(np.clip(u, 0.0, 1.0)) for u in np.atleast_2d(U)]
    results = isolation.evaluator(path, name, tuple(space.names), time_limit).evaluate(points)
    values = np.array([np.nan if v is None else sign * v for v, _ in results], dtype=float)
    return values, [why for _, why in results]


def _function_values(
    U: np.ndarray, path: str, name: str, space: Space, sign: float, time_limit: float
) -> np.ndarray:
    """The user's function at cube points U, NaN where an evaluation failed."""
    return _evaluations(U, path, name, space, sign, time_limit)[0]


class FunctionError(InputError):
    """The user's function cannot serve as a landscape (one line: file, function, why); it
    crosses process boundaries, pickled by its fields as every :class:`InputError`."""


@dataclass(frozen=True)
class UserFunction:
    """The user's function ``name`` in the file ``path`` over ``space``; ``goal`` its
    direction; ``minimum`` (in the minimising orientation) when known; ``time_limit`` the
    seconds one evaluation may take (default :data:`.isolation.DEFAULT_TIME_LIMIT`, 10 s)
    before it counts as failed."""

    path: str
    name: str
    space: Space
    goal: str = "minimise"
    minimum: float | None = None
    digest: str = ""
    time_limit: float = isolation.DEFAULT_TIME_LIMIT
    kind: str = field(default="function", init=False)
    placed_at_belief: bool = field(default=False, init=False)

    @property
    def minimum_estimated(self) -> bool:
        return self.minimum is None

    @property
    def _sign(self) -> float:
        return -1.0 if self.goal == "maximise" else 1.0

    def function(self):
        from functools import partial

        return partial(
            _function_values,
            path=self.path,
            name=self.name,
            space=self.space,
            sign=self._sign,
            time_limit=self.time_limit,
        )

    def take_first_failure(self) -> str | None:
        """Why this process's first failed evaluation of the function failed since the last
        call (None: none did); the run's summary names it."""
        names = tuple(self.space.names)
        return isolation.evaluator(
            self.path, self.name, names, self.time_limit
        ).take_first_failure()

    def _error(self, expected: str, got: str) -> FunctionError:
        return FunctionError(self.name, expected, raw(got), Path(self.path).name)

    def probe(self, u: np.ndarray) -> float:
        """Call the function once at cube point ``u`` in a child of its own; its seconds per
        call, or :class:`FunctionError` naming what went wrong (a signature that does not
        take the space's parameter names, an exception, a crash, a time-out, a non-number)."""
        names = tuple(self.space.names)
        child = isolation.Evaluator(self.path, self.name, names, self.time_limit)
        try:
            point = self.space.format_point(np.clip(np.asarray(u, dtype=float), 0.0, 1.0))
            failed = child._start()
            if failed is not None:
                raise self._error("a function that imports in a process of its own", failed)
            if not child.signature.binds:
                raise self._error(
                    f"a function taking the space's parameters ({', '.join(names)}) as "
                    "keywords, or one dict",
                    f"{self.name}{child.signature.text}",
                )
            start = time.perf_counter()
            [(_, why)] = child.evaluate([point])
            seconds = time.perf_counter() - start
        finally:
            child.close()
        if why is not None:
            shown = ", ".join(f"{k} = {v!r}" for k, v in point.items())
            raise self._error(f"a finite number at the belief's mode ({shown})", why)
        return seconds

    def landscape(self, name: str, dim: int, rng: np.random.Generator) -> Landscape:
        seen = {"ok": 0, "first": None}

        def searched(U):
            values, why = _evaluations(
                U, self.path, self.name, self.space, self._sign, self.time_limit
            )
            seen["ok"] += int(np.isfinite(values).sum())
            seen["first"] = seen["first"] or next((w for w in why if w), None)
            return np.nan_to_num(values, nan=_FAILED)

        u, value = surfaces.global_minimum(searched, dim, rng, n_dense=2**10, starts=4)
        if not seen["ok"]:
            raise self._error(
                f"a function that returns a number somewhere in the space (landscape {name!r})",
                f"every evaluation of the minimum search failed; the first {seen['first']}",
            )
        if self.minimum is not None:
            value = min(value, self.minimum)
        return _cube_landscape(
            name, dim, self.function(), value, u, f"{Path(self.path).name}:{self.name}"
        )
