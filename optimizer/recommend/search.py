"""Searching settings that meet the targets robustly at the least energy (or the most throughput).

The search works on *rays*: a base point ``u`` in the unit cube fixes everything but one
coordinate ``t`` ∈ [0, 1] along which the product gets more processing and the objective
gets worse —

* energy: ``u`` = belt speed (log-spaced share of the allowed range) and the shape of the
  power profile, ``t`` = total power as a share of the most that shape allows within the
  ratings and the cap. At a fixed speed the specific energy rises with the total power, so
  the best point of a ray is the smallest ``t`` in spec.
* throughput: ``u`` = the zones' powers (shares, scaled to the cap), ``t`` = belt speed from
  the top of the range down; the best point of a ray is again the smallest ``t`` in spec.

A ray is searched by a monotone line search (where the under-processing edges come into
spec, then a probe of all edges just above), so the outer search only compares rays:

1. global: a screen of ~256 rays stratified by belt speed (both ends included), each stratum
   holding the corner profiles (single zones, even pairs: zones off are often optimal) and
   scrambled Sobol shapes;
2. local: around the three best distinct rays, six rounds of axis steps, longer strides
   along the speed axis and random steps, with an adaptive radius; each candidate ray's
   window is centred where it gives the incumbent's energy per tonne;
3. exact: the best local optima are line-searched under every sample, then settled on the
   neighbouring keyed values (power steps, speed resolution) and checked again.

Along a ray the robust criterion is estimated cheaply by a *back-off surrogate*: the
margins of the nominal model plus the per-sample deviations measured at an anchor
setting, ``m_j(x, s) ≈ m_j(x) + [m_j(x_a, s) − m_j(x_a)]``. Anchors are per speed stratum in
the screen and move with each incumbent in the local rounds. The first stages ask the
surrogate for a small margin (``SURROGATE_FLOOR``), the last local rounds for none, and both
incumbents go to the exact stage: the first is safe, the second reaches optima on the very
edge of feasibility (where, e.g., the core's lower edge and the hottest-point limit bind at
once). Every setting returned has been checked on the full sample set — the surrogate only
ranks and places.
"""
from __future__ import annotations

import logging
import math
from dataclasses import dataclass
from itertools import combinations

import numpy as np
from scipy.stats import qmc

from .problem import RobustProblem, RobustScored

logger = logging.getLogger(__name__)

#: Belt-speed levels of the global screen, each with its own surrogate anchor.
SPEED_STRATA = 8
#: Line-search levels of the global screen along each ray, and inside the bracket found.
SCREEN_LEVELS = 8
BRACKET_LEVELS = 4
#: Local screen: seeds kept from the global screen, perturbations per seed and round, and
#: the radius in ``u`` and the half-width in ``t`` of each round.
LOCAL_SEEDS = 3
LOCAL_PERTURBATIONS = 16
LOCAL_ROUNDS = 6
LOCAL_RADIUS = 0.08  # first radius in u; halved after a round without improvement
LOCAL_MIN_HALF_WIDTH = 0.015  # of the t window, which is otherwise 0.75 × the radius
#: Rounds that keep the surrogate floor; the later ones drop it to reach an optimum on the edge
#: of feasibility, and both incumbents are checked exactly (the floored one is the safe one).
FLOORED_ROUNDS = 3
LOCAL_LEVELS = 6
#: Probes of all edges just above the under-processing crossing of a ray, in steps of ``t``.
PROBE_OFFSETS = (0.0, 1.0, 2.0, 4.0)
PROBE_STEP = 0.002
#: Exact ladder around a surrogate optimum, in steps of ``EXACT_STEP`` of ``t``.
EXACT_OFFSETS = (-1.0, 0.0, 2.0)
EXACT_STEP = 0.002
EXACT_ROUNDS = 3
#: Power-step combinations next to a continuous optimum that are checked under every sample.
STEP_CHECKS = 2
#: Local optima checked exactly: those whose surrogate objective is within this share of the best.
EXACT_WITHIN = 0.02
#: Margin the surrogate stages ask for, in the targets' units (K or % points): the surrogate's
#: error near an anchor is a few hundredths of that, measured on the demo plant.
SURROGATE_FLOOR = 0.05


@dataclass
class Candidate:
    """A setting that was checked under every sample."""

    speed: float
    powers: np.ndarray  # (Z,)
    objective: float
    criterion: float
    probability: float
    feasible: bool
    scored: RobustScored
    index: int  # row of ``scored``
    ray: tuple | None = None  # (kind, u, t) it came from, when known


# ----------------------------------------------------------------------------- rays

class Rays:
    """Maps (u, t) to settings; see the module docstring."""

    def __init__(self, problem: RobustProblem, kind: str):
        self.problem = problem
        self.kind = kind
        line = problem.line
        self.rating = np.asarray(line.zone_max_kw, dtype=float)
        self.cap = float(line.total_power_cap_kw)
        self.v_lo, self.v_hi = problem.speed_bounds_m_per_min
        self.dim = line.zone_count + (1 if kind == "energy" else 0)

    def speed(self, share):
        """Belt speed of a speed share in [0, 1]: log-spaced, as residence time acts by ratios."""
        return self.v_lo * (self.v_hi / self.v_lo) ** np.asarray(share, dtype=float)

    def settings(self, u: np.ndarray, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        u = np.clip(np.asarray(u, dtype=float), 0.0, 1.0)
        t = np.clip(np.asarray(t, dtype=float), 0.0, 1.0)
        if self.kind == "energy":
            return self.speed(u[..., 0]), t[..., None] * self.top_powers(u[..., 1:])
        levels = self.top_powers(u) * np.minimum(1.0, u.max(axis=-1, keepdims=True))
        return self.speed(1.0 - t), levels

    def top_powers(self, shape: np.ndarray) -> np.ndarray:
        """The largest powers of a profile shape (shares of rating) within every rating and the cap."""
        shape = np.where((shape > 0).any(axis=-1, keepdims=True), shape, 1.0)
        w = shape * self.rating
        scale = np.maximum((w / self.rating).max(axis=-1), w.sum(axis=-1) / self.cap)
        return w / scale[..., None]

    def predict_t(self, u_from: np.ndarray, t_from: np.ndarray, u_to: np.ndarray) -> np.ndarray:
        """Where on ray ``u_to`` the product gets the energy per tonne it gets at (u_from, t_from).

        Total forward power over belt speed is held: a faster belt needs proportionally more
        power, more power carries a faster belt. A first guess that centres local ladders.
        """
        speed0, p0 = self.settings(u_from, t_from)
        per_speed = p0.sum(axis=-1) / speed0
        if self.kind == "energy":
            speed1 = self.speed(np.clip(u_to[..., 0], 0.0, 1.0))
            top = self.top_powers(np.clip(u_to[..., 1:], 0.0, 1.0)).sum(axis=-1)
            return per_speed * speed1 / np.maximum(top, 1e-9)
        total1 = self.settings(u_to, np.zeros(u_to.shape[:-1]))[1].sum(axis=-1)
        speed1 = total1 / np.maximum(per_speed, 1e-9)
        return 1.0 - np.log(np.maximum(speed1, 1e-9) / self.v_lo) / np.log(self.v_hi / self.v_lo)


# ----------------------------------------------------------------------------- surrogate line search

def _surrogate(problem: RobustProblem, margins: np.ndarray, deviation: np.ndarray, columns=None,
               chunk_rows: int = 64) -> np.ndarray:
    """Criterion of nominal margins (N, L, J) shifted by per-sample deviations (S, J) or per ray (N, S, J).

    Works through the rays in chunks: the shifted margins hold N·L·S·J numbers.
    """
    n = margins.shape[0]
    out = np.empty(margins.shape[:-1])
    for lo in range(0, n, chunk_rows):
        sl = slice(lo, lo + chunk_rows)
        dev = deviation if deviation.ndim == 2 else deviation[sl][:, None, :, :]
        out[sl] = problem.criterion(margins[sl][..., None, :] + dev, columns)
    return out


def _deviation(scored: RobustScored, index: int = 0) -> np.ndarray:
    """Per-sample margin deviations (S, J) from the nominal at one robustly checked setting."""
    dev = scored.margins[index] - scored.nominal.margins[index][None, :]
    return np.nan_to_num(dev, nan=-1e3, neginf=-1e3, posinf=1e3)


@dataclass
class _Ladder:
    """Nominal evaluations along rays: t (N, L), margins (N, L, J), objective (N, L)."""

    t: np.ndarray
    margins: np.ndarray
    objective: np.ndarray


def _ladder(problem: RobustProblem, rays: Rays, u: np.ndarray, t: np.ndarray) -> _Ladder:
    n, levels = t.shape
    speed, powers = rays.settings(np.repeat(u, levels, axis=0), t.reshape(-1))
    scored = problem.nominal(speed, powers)
    return _Ladder(t, scored.margins.reshape(n, levels, -1), problem.objective_of(scored).reshape(n, levels))


def _first_in_spec(t: np.ndarray, q: np.ndarray, objective: np.ndarray):
    """Smallest t with q ≥ 0 on each row, interpolating q linearly; NaN where no level is in spec.

    Returns (t*, objective at t*, index of the first level in spec). A row already in
    spec at its first level returns that level (the ray may go lower: a conservative answer).
    """
    ok = q >= 0.0
    found = ok.any(axis=1)
    k = np.where(found, ok.argmax(axis=1), 0)
    rows = np.arange(t.shape[0])
    km = np.maximum(k - 1, 0)
    q0, q1 = q[rows, km], q[rows, k]
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.where((k > 0) & np.isfinite(q0) & (q1 > q0), -q0 / (q1 - q0), 1.0)
    frac = np.clip(frac, 0.0, 1.0)
    t_star = t[rows, km] + frac * (t[rows, k] - t[rows, km])
    obj = objective[rows, km] + frac * (objective[rows, k] - objective[rows, km])
    t_star = np.where(found, t_star, np.nan)
    obj = np.where(found, obj, np.inf)
    return t_star, obj, np.where(found, k, -1)


def _crossing(t: np.ndarray, q: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per row: the smallest t where q (ascending t) reaches 0, interpolated; and the index of the
    first level at or above it (−1 where no level is in spec)."""
    t_star, _, k = _first_in_spec(t, q, np.zeros_like(t))
    return t_star, k


def _ray_search(problem: RobustProblem, rays: Rays, u: np.ndarray, deviation, levels: np.ndarray | None = None,
                coarse: _Ladder | None = None, floor: float = 0.0):
    """Surrogate optimum of each ray: (t*, objective*), NaN / inf where the ray has none.

    1. On the ladder ``levels`` (N, L) (or its evaluated ``coarse``), bracket where the
       under-processing edges come into spec.
    2. Inside the bracket, ``BRACKET_LEVELS`` more levels; interpolate that crossing, t_u.
    3. Just above t_u (``PROBE_OFFSETS`` × ``PROBE_STEP``), all edges: the first level in spec.
    The over-processing edges only get worse above t_u, so when they fail there the ray has no
    point in spec (bar a sliver the probes cover, where the joint share trades one edge for another).
    "In spec" means a surrogate criterion ≥ ``floor``: a small safety margin for the
    surrogate's error, so that the exact check near the answer finds the setting in spec.
    """
    n = u.shape[0]
    t_star = np.full(n, np.nan)
    obj = np.full(n, np.inf)
    under = problem.role_columns("under")
    cols = under if under.size else None
    coarse = coarse if coarse is not None else _ladder(problem, rays, u, levels)
    _, k = _crossing(coarse.t, _surrogate(problem, coarse.margins, deviation, cols) - floor)
    idx = np.flatnonzero(k >= 0)
    if idx.size == 0:
        return t_star, obj
    dev = deviation if deviation.ndim == 2 else deviation[idx]
    k = k[idx]
    t_hi, t_lo = coarse.t[idx, k], coarse.t[idx, np.maximum(k - 1, 0)]
    inner = t_lo[:, None] + (t_hi - t_lo)[:, None] * np.linspace(0.0, 1.0, BRACKET_LEVELS + 2)[None, :]
    fine = _ladder(problem, rays, u[idx], inner)
    t_u, _ = _crossing(fine.t, _surrogate(problem, fine.margins, dev, cols) - floor)
    t_u = np.where(np.isfinite(t_u), t_u, t_hi)
    probe = np.clip(t_u[:, None] + PROBE_STEP * np.asarray(PROBE_OFFSETS)[None, :], 0.0, 1.0)
    near = _ladder(problem, rays, u[idx], probe)
    t_star[idx], obj[idx], _ = _first_in_spec(near.t, _surrogate(problem, near.margins, dev) - floor,
                                              near.objective)
    return t_star, obj


def _best_level(problem: RobustProblem, ladder: _Ladder, deviation):
    """Per ray: (t, −criterion) at the ladder level with the largest surrogate criterion."""
    q = _surrogate(problem, ladder.margins, deviation)
    j = q.argmax(axis=1)
    rows = np.arange(q.shape[0])
    return ladder.t[rows, j], -q[rows, j]


# ----------------------------------------------------------------------------- exact checks

def check_robust(problem: RobustProblem, speed, powers, keyed: bool = True) -> list[Candidate]:
    """Settings checked under every sample (first rounded to what the operator keys in, by default)."""
    speed = np.asarray(speed, dtype=float).reshape(-1)
    powers = np.asarray(powers, dtype=float).reshape(speed.size, -1)
    if keyed:
        speed, powers = problem.round_speed(speed), problem.round_to_steps(powers)
    scored = problem.robust(speed, powers)
    obj = problem.objective_of(scored.nominal)
    return [Candidate(float(scored.speed[i]), scored.powers[i].copy(), float(obj[i]), float(scored.criterion[i]),
                      float(scored.probability[i]), bool(scored.criterion[i] >= 0.0), scored, i)
            for i in range(scored.speed.size)]


def _exact_along_rays(problem: RobustProblem, rays: Rays, u: np.ndarray, t0: np.ndarray,
                      rounds: int = EXACT_ROUNDS) -> list[Candidate]:
    """Exact line search near t0 on each ray, then power steps; the best feasible candidate per ray.

    Each round checks a short ladder under every sample. When no level is in spec the next
    ladder sits where the secant of the exact under-processing criterion crosses zero, with
    finer offsets (the window in spec can be narrow); when the lowest level is already in
    spec it moves down the same way. Each continuous
    optimum on the neighbouring keyed values (:func:`settle_on_steps`).
    """
    under = problem.role_columns("under")
    cols = under if under.size else None
    centre = np.asarray(t0, dtype=float).copy()
    spacing = np.full(u.shape[0], EXACT_STEP)
    best: dict[int, Candidate] = {}
    active = np.isfinite(centre)
    offsets = np.asarray(EXACT_OFFSETS, dtype=float)
    for _ in range(rounds):
        idx = np.flatnonzero(active)
        if idx.size == 0:
            break
        t = np.clip(centre[idx, None] + spacing[idx, None] * offsets[None, :], 0.0, 1.0)
        speed, powers = rays.settings(np.repeat(u[idx], offsets.size, axis=0), t.reshape(-1))
        cands = check_robust(problem, speed, powers, keyed=False)
        q_under = problem.criterion(cands[0].scored.margins, cols).reshape(idx.size, offsets.size)
        for row, i in enumerate(idx):
            chunk = cands[row * offsets.size:(row + 1) * offsets.size]
            ok = [c for c in chunk if c.feasible]
            for c in ok:
                if i not in best or c.objective < best[i].objective:
                    best[i] = c
            tt, qu = t[row], q_under[row]
            cross = _secant_zero(tt, qu)
            if not ok and qu.max() < 0 and tt[-1] < 1.0:  # under-processed throughout: go up
                centre[i] = max(cross if np.isfinite(cross) else tt[-1] + 8 * spacing[i], tt[-1])
            elif not ok and qu.max() >= 0:  # the window, if any, lies between two levels: look closer
                centre[i] = cross if np.isfinite(cross) else tt[int(np.argmax(qu >= 0))]
                spacing[i] *= 0.25
            elif ok and chunk[0].feasible and tt[0] > 0.0:  # in spec at the lowest level: go down
                centre[i] = min(cross, tt[0]) if np.isfinite(cross) else tt[0] - 4 * spacing[i]
            else:
                active[i] = False
    return [c for c in (settle_on_steps(problem, c) for c in best.values()) if c is not None]


def _secant_zero(t: np.ndarray, q: np.ndarray) -> float:
    """Where the straight line through the two levels nearest q = 0 crosses it (NaN if flat)."""
    good = np.isfinite(q)
    if good.sum() < 2:
        return float("nan")
    t, q = t[good], q[good]
    i, j = np.argsort(np.abs(q))[:2]
    if q[i] == q[j] or t[i] == t[j]:
        return float("nan")
    return float(t[i] - q[i] * (t[j] - t[i]) / (q[j] - q[i]))


def settle_on_steps(problem: RobustProblem, cand: Candidate, checks: int = STEP_CHECKS) -> Candidate | None:
    """The best keyed setting (power steps, speed resolution) next to a continuous optimum, checked exactly.

    Every combination of the step below and above each zone's power (within ratings and cap)
    is scored by the surrogate anchored at the continuous optimum; the ``checks`` best that it
    puts in spec are checked under every sample, and combinations one step higher overall are
    tried when none passes.
    """
    step = problem.power_step_kw
    top = np.floor(np.asarray(problem.line.zone_max_kw) / step + 1e-9) * step
    z = cand.powers.size
    bits = ((np.arange(2 ** z)[:, None] >> np.arange(z)[None, :]) & 1).astype(float)
    dev = _deviation(cand.scored, cand.index)
    speed = float(problem.round_speed(np.array([cand.speed]))[0])
    for lift in (0.0, 1.0):
        low = np.floor(cand.powers / step + 1e-9) * step
        combos = np.unique(np.round(np.clip(low[None, :] + step * (bits + lift), 0.0, top), 6), axis=0)
        combos = combos[combos.sum(axis=1) <= problem.line.total_power_cap_kw + 1e-9]
        if combos.shape[0] == 0:
            continue
        scored = problem.nominal(np.full(combos.shape[0], speed), combos)
        q = _surrogate(problem, scored.margins[:, None, :], dev)[:, 0]
        obj = np.where(q >= 0, problem.objective_of(scored), np.inf)
        cheapest = [i for i in np.argsort(obj) if np.isfinite(obj[i])][:checks]
        safest = [i for i in np.argsort(-q) if i not in cheapest][:checks]
        for order in (cheapest, safest):  # the cheapest the surrogate puts in spec, then the safest
            if not order:
                continue
            exact = [c for c in check_robust(problem, np.full(len(order), speed), combos[order]) if c.feasible]
            if exact:
                return min(exact, key=lambda c: c.objective)
    return None


# ----------------------------------------------------------------------------- the search

@dataclass
class SearchResult:
    best: Candidate | None  # feasible optimum, or None
    pool: tuple[np.ndarray, np.ndarray, np.ndarray]  # global screen of energy rays: u, t*, objective*
    rays: Rays  # the energy rays of the pool
    deviation: np.ndarray  # the pool's anchor deviations, per ray (N, S, J)


def _sobol(dim: int, n: int, rng: np.random.Generator) -> np.ndarray:
    sampler = qmc.Sobol(dim, scramble=True, seed=rng)
    return sampler.random_base2(int(math.ceil(math.log2(n))))


def _anchor(problem: RobustProblem, rays: Rays, u, t) -> RobustScored:
    speed, powers = rays.settings(np.atleast_2d(u), np.atleast_1d(t))
    return problem.robust(speed, powers)


def _anchors(problem: RobustProblem, rays: Rays, u, t) -> np.ndarray:
    """Deviations (B, S, J) at B settings, checked in one call."""
    scored = _anchor(problem, rays, u, t)
    return np.stack([_deviation(scored, i) for i in range(scored.speed.size)])


def _full_ladder(problem, rays, u, levels: int = SCREEN_LEVELS) -> _Ladder:
    t = np.broadcast_to(np.linspace(0.0, 1.0, levels + 1)[None, :], (u.shape[0], levels + 1))
    return _ladder(problem, rays, u, np.array(t))


def _nominal_best(coarse: _Ladder) -> tuple[int, int]:
    """Ray and level of the nominal best in spec (or, if nothing is, of the nearest miss)."""
    q = coarse.margins.min(axis=-1)
    score = np.where(q >= 0, coarse.objective, np.inf)
    if np.isfinite(score).any():
        return np.unravel_index(np.argmin(score), score.shape)
    return np.unravel_index(np.argmax(q), q.shape)


@dataclass
class Screen:
    """A global screen: base points, strata, their coarse ladder and anchor deviations per ray."""

    rays: Rays
    u: np.ndarray
    strata: np.ndarray
    coarse: _Ladder
    deviation: np.ndarray  # (N, S, J)


def global_screen(problem: RobustProblem, rays: Rays, u: np.ndarray, strata: np.ndarray,
                  levels: int = SCREEN_LEVELS) -> Screen:
    """Coarse ladders of every ray and the surrogate anchors of each stratum.

    The surrogate of each stratum (e.g. a belt-speed level) is anchored at its nominal best
    (or nearest miss): the spread a setting meets under the samples depends on where it
    lies, most on the belt speed, so one anchor for all would misjudge the far ones.
    """
    coarse = _full_ladder(problem, rays, u, levels)
    groups = [np.flatnonzero(strata == g) for g in np.unique(strata)]
    best = [_nominal_best(_sub(coarse, g)) for g in groups]
    picks = [g[i] for g, (i, _) in zip(groups, best)]
    dev = _per_stratum(_anchors(problem, rays, u[picks], coarse.t[picks, [j for _, j in best]]), groups, u.shape[0])
    return Screen(rays, u, strata, coarse, dev)


def screen_optima(problem: RobustProblem, screen: Screen, floor: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Surrogate optimum (t*, objective*) of every ray of a screen; each stratum is re-anchored
    once at its surrogate best (kept in the screen for later calls)."""
    rays, u, coarse = screen.rays, screen.u, screen.coarse
    t_star, obj = _ray_search(problem, rays, u, screen.deviation, coarse=coarse, floor=floor)
    groups = [np.flatnonzero(screen.strata == g) for g in np.unique(screen.strata)]
    redo = [(g, g[np.argmin(obj[g])]) for g in groups if np.isfinite(obj[g]).any()]
    if redo:
        fresh = _anchors(problem, rays, u[[i for _, i in redo]], t_star[[i for _, i in redo]])
        for (g, _), d in zip(redo, fresh):
            screen.deviation[g] = d
        t_star, obj = _ray_search(problem, rays, u, screen.deviation, coarse=coarse, floor=floor)
    return t_star, obj


def _sub(ladder: _Ladder, rows) -> _Ladder:
    return _Ladder(ladder.t[rows], ladder.margins[rows], ladder.objective[rows])


def _per_stratum(devs: np.ndarray, groups, n: int) -> np.ndarray:
    out = np.empty((n,) + devs.shape[1:])
    for g, d in zip(groups, devs):
        out[g] = d
    return out


def screen_points(rays: Rays, n_rays: int, rng: np.random.Generator, strata: int = SPEED_STRATA):
    """Base points of the global screen and their stratum.

    Energy rays: ``strata`` belt-speed levels from the lowest to the highest allowed
    (log-spaced), each with the corner shapes of the profile simplex (single zones and even
    pairs: zones off are often optimal) and scrambled Sobol shapes (uniform on the simplex)
    up to ``n_rays`` in all. Throughput rays: every zone off or at its rating, then Sobol
    zone powers, stratified by total power.
    """
    z = rays.problem.line.zone_count
    if rays.kind == "throughput":
        corners = ((np.arange(1, 2 ** z)[:, None] >> np.arange(z)[None, :]) & 1).astype(float)[: n_rays // 4]
        u = np.concatenate([corners, _sobol(z, n_rays, rng)[: n_rays - corners.shape[0]]])
        total = rays.settings(u, np.zeros(u.shape[0]))[1].sum(axis=1)
        return u, np.minimum((strata * total / max(total.max(), 1e-9)).astype(int), strata - 1)
    per = max(1, n_rays // strata)
    corners = simplex_lattice(z, 2)[:per]
    sob = -np.log1p(-_sobol(z, strata * per, rng) * (1 - 1e-12))  # exponential → uniform on the simplex
    shapes = []
    for k in range(strata):
        own = sob[k * per:(k + 1) * per][: per - corners.shape[0]]
        shapes.append(np.concatenate([corners, own]))
    shapes = np.concatenate(shapes)
    shapes = shapes / shapes.max(axis=1, keepdims=True)
    speed = np.repeat(np.linspace(0.0, 1.0, strata), per)
    return np.concatenate([speed[:, None], shapes], axis=1), np.repeat(np.arange(strata), per)


def _distinct_best(u, score, count, min_distance=0.15) -> list[int]:
    order = np.argsort(score)
    chosen: list[int] = []
    for i in order:
        if not np.isfinite(score[i]):
            break
        if all(np.linalg.norm(u[i] - u[j]) >= min_distance for j in chosen):
            chosen.append(int(i))
        if len(chosen) == count:
            break
    return chosen


def local_screen(problem: RobustProblem, rays: Rays, seeds_u: np.ndarray, seeds_t: np.ndarray,
                 rng: np.random.Generator, score: str = "objective", floor: float = 0.0):
    """Shrinking vectorised screens around each seed, the surrogate re-anchored at each incumbent.

    Each round scores the incumbent, one step along each axis both ways, longer strides along
    the first axis, and random steps of the round's radius; each candidate ray is searched in
    a window centred where it gives the incumbent's energy per tonne. ``score`` 'objective'
    minimises the objective at the first point in spec of each ray; 'criterion' maximises
    the criterion (the closest compromise). The first ``FLOORED_ROUNDS`` ask for ``floor``.

    Returns [(u, t*, score*) after the floored rounds, (u, t*, score*) after all rounds].
    """
    u = np.array(seeds_u, dtype=float)
    t = np.array(seeds_t, dtype=float)
    b, d = u.shape
    moves = _axis_moves(d)
    k = 1 + moves.shape[0] + LOCAL_PERTURBATIONS
    best = np.full(b, np.inf)
    rows = np.arange(b)
    snapshots = []
    radius = np.full(b, LOCAL_RADIUS)
    for n in range(LOCAL_ROUNDS):
        if n == FLOORED_ROUNDS:
            snapshots.append((u.copy(), t.copy(), best.copy()))
            best = np.full(b, np.inf)  # re-scored without the floor
        half_width = np.maximum(0.75 * radius, LOCAL_MIN_HALF_WIDTH)
        devs = np.repeat(_anchors(problem, rays, u, t), k, axis=0)
        r = radius[:, None, None]
        pert = np.concatenate([u[:, None, :], u[:, None, :] + r * moves[None, :, :],
                               u[:, None, :] + r * rng.standard_normal((b, LOCAL_PERTURBATIONS, d))], axis=1)
        pert = np.clip(pert, 0.0, 1.0).reshape(b * k, d)
        centre = rays.predict_t(np.repeat(u, k, axis=0), np.repeat(t, k), pert)
        levels = np.clip(centre[:, None] + np.repeat(half_width, k)[:, None]
                         * np.linspace(-1.0, 1.0, LOCAL_LEVELS)[None, :], 0.0, 1.0)
        if score == "objective":
            t_new, s_new = _ray_search(problem, rays, pert, devs, levels=levels,
                                       floor=floor if n < FLOORED_ROUNDS else 0.0)
        else:
            t_new, s_new = _best_level(problem, _ladder(problem, rays, pert, levels), devs)
        s_new, t_new = s_new.reshape(b, k), t_new.reshape(b, k)
        j = np.argmin(s_new, axis=1)
        improved = np.isfinite(s_new[rows, j]) & (s_new[rows, j] <= best)
        moved = improved & (j > 0) & (s_new[rows, j] < s_new[rows, 0])  # a step beat the incumbent
        radius = np.where(moved, radius, 0.5 * radius)
        u = np.where(improved[:, None], pert.reshape(b, k, -1)[rows, j], u)
        t = np.where(improved, t_new[rows, j], t)
        best = np.where(improved, s_new[rows, j], best)
    snapshots.append((u, t, best))
    return snapshots


def _axis_moves(dim: int) -> np.ndarray:
    """Steps of one radius along each axis, both ways, and longer strides along the first
    (the belt speed of energy rays, where the optimum often lies on a ridge of feasibility)."""
    eye = np.eye(dim)
    strides = np.array([2.0, 4.0, -2.0, -4.0])[:, None] * eye[0][None, :]
    return np.concatenate([eye, -eye, strides])


def _pick(cands: list[Candidate], objective: str) -> Candidate | None:
    ok = [c for c in cands if c.feasible]
    if not ok:
        return None
    if objective == "throughput":  # most throughput; within 0.2 % of it, the least energy
        top = min(c.objective for c in ok)
        near = [c for c in ok if c.objective <= top * (1 - 0.002)]
        return min(near, key=lambda c: c.scored.nominal.outcome.specific_energy_kwh_per_t[c.index])
    return min(ok, key=lambda c: c.objective)


def search(problem: RobustProblem, rng: np.random.Generator, n_rays: int = 256) -> SearchResult:
    """Global stratified screen of rays → local screens around the best few → exact line search.

    The surrogate stages ask for ``SURROGATE_FLOOR`` of margin, then for none if that leaves
    nothing in spec (a sliver of feasible settings). The energy rays are always screened
    (they also give the Pareto front); for the throughput objective the throughput rays are
    searched, and a half-size energy screen serves the front.
    """
    energy = Rays(problem, "energy")
    own = n_rays if problem.objective == "energy" else n_rays // 2
    pool_screen = global_screen(problem, energy, *screen_points(energy, own, rng))
    screen = pool_screen
    if problem.objective == "throughput":
        rays = Rays(problem, "throughput")
        screen = global_screen(problem, rays, *screen_points(rays, n_rays, rng))
    best, pool = None, None
    for floor in (SURROGATE_FLOOR, 0.0):
        st, sobj = screen_optima(problem, screen, floor)
        pool = (pool_screen.u, *(screen_optima(problem, pool_screen, floor) if screen is not pool_screen
                                 else (st, sobj)))
        seeds = _distinct_best(screen.u, sobj, LOCAL_SEEDS)
        if seeds:
            (su_, st_, ss_), (lu, lt, ls) = local_screen(problem, screen.rays, screen.u[seeds], st[seeds], rng,
                                                         floor=floor)
            lu, lt, lscore = np.concatenate([su_, lu]), np.concatenate([st_, lt]), np.concatenate([ss_, ls])
            top = lscore[np.isfinite(lscore)].min() if np.isfinite(lscore).any() else np.inf
            keep = np.isfinite(lscore) & (lscore <= top + EXACT_WITHIN * abs(top))
            best = _pick(_exact_along_rays(problem, screen.rays, lu[keep], lt[keep]), problem.objective)
        logger.info("search %s × %s (floor %g): %d seeds, best %s", problem.line.line_id,
                    problem.product.product_id, floor, len(seeds), "none" if best is None else f"{best.objective:.4g}")
        if best is not None:
            break
    return SearchResult(best, pool, energy, pool_screen.deviation)


def from_compromise(problem: RobustProblem, result: SearchResult, compromise: Candidate) -> Candidate | None:
    """When the closest compromise is in spec after all, the best setting down its ray from it."""
    if compromise.ray is None or not compromise.feasible:
        return None
    kind, u, t = compromise.ray
    rays = result.rays if kind == result.rays.kind else Rays(problem, kind)
    return _pick(_exact_along_rays(problem, rays, u[None, :], np.array([t])) + [compromise], problem.objective)


def closest_compromise(problem: RobustProblem, result: SearchResult, rng: np.random.Generator) -> Candidate:
    """The setting with the largest robust criterion: how near the targets come at the confidence."""
    rays = result.rays
    u = result.pool[0]
    t, score = _best_level(problem, _full_ladder(problem, rays, u, 16), result.deviation)
    seeds = _distinct_best(u, score, LOCAL_SEEDS)
    lu, lt, _ = local_screen(problem, rays, u[seeds], t[seeds], rng, score="criterion")[-1]
    offsets = np.array([-2.0, -1.0, 0.0, 1.0, 2.0])
    tt = np.clip(lt[:, None] + 2 * EXACT_STEP * offsets[None, :], 0.0, 1.0)
    speed, powers = rays.settings(np.repeat(lu, offsets.size, axis=0), tt.reshape(-1))
    cands = check_robust(problem, speed, powers)
    for i, c in enumerate(cands):
        c.ray = (rays.kind, lu[i // offsets.size], float(tt.reshape(-1)[i]))
    return max(cands, key=lambda c: (c.criterion, c.probability))


def pareto_front(problem: RobustProblem, result: SearchResult, points: int = 5) -> list[Candidate]:
    """A few feasible settings trading specific energy against throughput, with the optimum.

    Only settings that could be non-dominated are looked for: faster than the energy
    optimum (or, for the throughput objective, cheaper than its optimum). Their belt-speed
    range in the global screen is cut into ``points`` log-spaced bands; the screen's best ray
    of each band is searched exactly, and the dominated results are dropped.
    """
    best = result.best
    if best is None:
        return []
    u, t_star, obj = result.pool
    rays = result.rays
    speed = rays.speed(u[:, 0])
    ok = np.isfinite(t_star) & np.isfinite(obj)
    if problem.objective == "energy":
        ok &= speed > best.speed * 1.02
    else:
        best_energy = float(best.scored.nominal.outcome.specific_energy_kwh_per_t[best.index])
        ok &= (speed < best.speed * 0.98) & (obj < best_energy)
    if not ok.any():
        return [best]
    idx = np.flatnonzero(ok)
    edges = np.geomspace(speed[idx].min(), speed[idx].max() * (1 + 1e-9), points + 1)
    band = np.clip(np.searchsorted(edges, speed[idx], side="right") - 1, 0, points - 1)
    picks = [int(idx[band == b][np.argmin(obj[idx][band == b])]) for b in range(points) if (band == b).any()]
    energy_problem = problem.with_objective("energy", problem.min_throughput_kg_per_h)
    cands = _exact_along_rays(energy_problem, rays, u[picks], t_star[picks], rounds=2)
    return non_dominated(cands + [best])


def non_dominated(cands: list[Candidate]) -> list[Candidate]:
    def se(c):
        return float(c.scored.nominal.outcome.specific_energy_kwh_per_t[c.index])

    def tp(c):
        return float(c.scored.nominal.outcome.throughput_kg_per_h[c.index])

    keep = [c for c in cands if not any((se(o) <= se(c) and tp(o) >= tp(c)) and (se(o) < se(c) or tp(o) > tp(c))
                                        for o in cands)]
    unique = {}
    for c in sorted(keep, key=tp):
        unique.setdefault((round(tp(c), 3), round(se(c), 4)), c)
    return list(unique.values())


# ----------------------------------------------------------------------------- dense reference

@dataclass
class DenseResult:
    best: Candidate | None
    grid_points: int  # rays on the grid
    nominal_evaluations: int
    sampled_evaluations: int


def simplex_lattice(zones: int, divisions: int) -> np.ndarray:
    """All profile shapes with shares k/divisions summing to one (stars and bars)."""
    shapes = []
    for bars in combinations(range(divisions + zones - 1), zones - 1):
        edges = (-1,) + bars + (divisions + zones - 1,)
        shapes.append([edges[i + 1] - edges[i] - 1 for i in range(zones)])
    return np.asarray(shapes, dtype=float) / divisions


def dense_search(problem: RobustProblem, *, speed_levels: int = 16, divisions: int | None = None,
                 power_levels: int = 16, finalists: int = 6) -> DenseResult:
    """Brute-force reference for tests and benchmarks: a full grid instead of screens.

    Energy objective: every belt speed of ``speed_levels`` evenly spaced × every profile
    shape of a simplex lattice (``divisions`` shares per zone; by default as many as keep the
    lattice near 100 shapes), each searched along its total power with ``power_levels``
    levels plus a bracket refinement. The surrogate is anchored at the grid's nominal
    best, then re-anchored at the grid's surrogate best; the ``finalists`` best grid rays
    (distinct) are checked under every sample along the ray, as the search does. The
    throughput objective uses a lattice of zone powers instead (speed is then the ray).
    """
    z = problem.line.zone_count
    if divisions is None:
        divisions = next(d for d in range(12, 0, -1) if math.comb(d + z - 1, z - 1) <= 130)
    before = dict(problem.evaluations)
    if problem.objective == "energy":
        rays = Rays(problem, "energy")
        shapes = simplex_lattice(z, divisions)
        speeds = np.linspace(0.0, 1.0, speed_levels)
        u = np.concatenate([np.repeat(speeds, shapes.shape[0])[:, None], np.tile(shapes, (speed_levels, 1))], axis=1)
        strata = np.repeat(np.arange(speed_levels), shapes.shape[0])
    else:
        rays = Rays(problem, "throughput")
        levels = np.linspace(0.0, 1.0, max(2, divisions // 2 + 1))
        u = np.array(np.meshgrid(*([levels] * z), indexing="ij")).reshape(z, -1).T[1:]  # all off: no ray
        total = rays.settings(u, np.zeros(u.shape[0]))[1].sum(axis=1)
        strata = np.minimum((speed_levels * total / total.max()).astype(int), speed_levels - 1)
    t_star, obj = screen_optima(problem, global_screen(problem, rays, u, strata, power_levels))
    picks = _distinct_best(u, obj, finalists, min_distance=1e-9)
    cands = _exact_along_rays(problem, rays, u[picks], t_star[picks]) if picks else []
    return DenseResult(_pick(cands, problem.objective), int(u.shape[0]),
                       problem.evaluations["nominal"] - before["nominal"],
                       problem.evaluations["sampled"] - before["sampled"])
