"""Resistor networks and matched pairs: parts whose errors are shared.

Over 500 lines only with its docstrings (numpydoc Parameters/Returns sections on every
public function, issue 12 item 7); its code is under 500 lines.

A network (a resistor array in one package, or a matched pair: a network of two) names
its members (parts of the design) and states three figures:

- ``tolerance_pct``: each member's absolute tolerance (plus/minus percent of its marked
  value), read as :data:`COVERAGE` standard deviations (common practice);
- ``ratio_pct``: the tolerance of the ratio of any two members (plus/minus percent of the
  marked ratio), read the same way;
- ``tracking_ppm``: the temperature coefficients of any two members differ by at most this
  (ppm/K).

Model. With k = :data:`COVERAGE`, t = tolerance_pct / 100 and r = ratio_pct / 100, each
board draws one shared error e_c per network and one own error e_i per member, both normal
(not truncated; clipped at 8 standard deviations as every normal score is) and
independent::

    R_i = R_i,marked * (1 + e_c) * (1 + e_i) * (temperature and drift factors of its grade)
    sigma_m = r / (k sqrt 2)                                 (std of e_i)
    sigma_c = sqrt((s_t^2 - sigma_m^2) / (1 + sigma_m^2)),  s_t = t / k   (std of e_c)

so that

- one member's relative standard deviation is exactly s_t = t / k:
  (1 + sigma_c^2)(1 + sigma_m^2) - 1 = s_t^2;
- the ratio of two members R_i / R_j = (marked ratio) (1 + e_i) / (1 + e_j) does not hold
  e_c at all, and its relative standard deviation is sqrt(2) sigma_m = r / k to first order
  (the next term is of order sigma_m^3).

Hence the rule 0 <= ratio_pct <= sqrt(2) tolerance_pct: at the upper end nothing is
shared (two independent parts of tolerance t have a ratio tolerance of sqrt(2) t).

Temperature coefficients: a member's grade gives the nominal coefficient TC0 and the spread
+-s between packages (ppm/K); in a network TC_i = TC0 + s u_c + (tracking / 2) u_i with u_c
(shared) and u_i (own) uniform on [-1, 1], so |TC_i - TC_j| <= tracking. Drift stays each
member's own. A member's grade still sets its kind, temperature coefficient, drift and cost;
its grade tolerance (and a what-if tolerance) is replaced by the network's figures. Lot
sharing (``analysis.lot_share``) does not apply to members: the network is its own lot.

Scores (common random numbers): a member's own error e_i takes the member's own value score
and u_i its own temperature-coefficient score; the shared scores (two per network: value
and temperature coefficient) come from a separate stream (:func:`shared_scores`), so a
design without networks draws exactly what it drew before, and adding a network changes no
other part's values.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any, Sequence

import numpy as np

from .errors import InputError, is_finite_number
from .grades import Grade
from .lazyimport import LazyModule
from .sampling import Conditions, draw_scores, part_values

if TYPE_CHECKING:  # pragma: no cover
    from .design import Design, Part

__all__ = [
    "COVERAGE",
    "MAX_TOLERANCE_PCT",
    "MAX_TRACKING_PPM",
    "Network",
    "member_sigma",
    "shared_sigma",
    "ratio_sigma",
    "networks_from_dict",
    "networks_to_dict",
    "stream_seed",
    "shared_scores",
    "network_grades",
    "corner_grades",
    "board_values",
    "shared_log_deviation",
]

special = LazyModule("scipy.special")

COVERAGE = 2.0            # a network's tolerances read as two standard deviations (common practice)
MAX_TOLERANCE_PCT = 10.0  # beyond +-10 % no resistor network is sold (from memory); keeps 8 sigma above 0
MAX_TRACKING_PPM = 1000.0
_CLIP = 8.0               # scores are clipped at 8 standard deviations, as sampling does
_NETWORK_STREAM = 0x6E6574  # "net": the tag of the shared scores' own stream


@dataclass(frozen=True)
class Network:
    """A resistor network or matched pair: members (part refs), absolute tolerance and
    ratio tolerance (plus/minus percent, :data:`COVERAGE` standard deviations), temperature
    coefficient tracking (ppm/K). ``across_channels``: one package serves every channel
    (its shared error is the same in all channels), else each channel has its own."""

    name: str
    members: tuple[str, ...]
    tolerance_pct: float
    ratio_pct: float
    tracking_ppm: float = 0.0
    across_channels: bool = False

    @property
    def sigma_member(self) -> float:
        return member_sigma(self.tolerance_pct)

    @property
    def sigma_own(self) -> float:
        """Standard deviation of a member's own error e_i (fraction)."""
        return self.ratio_pct / 100.0 / COVERAGE / math.sqrt(2.0)

    @property
    def sigma_shared(self) -> float:
        """Standard deviation of the shared error e_c (fraction)."""
        return shared_sigma(self.tolerance_pct, self.ratio_pct)

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {"name": self.name, "members": list(self.members),
                             "tolerance_pct": self.tolerance_pct, "ratio_pct": self.ratio_pct,
                             "tracking_ppm": self.tracking_ppm}
        if self.across_channels:
            d["across_channels"] = True
        return d


def member_sigma(tolerance_pct: float) -> float:
    """One member's relative standard deviation (fraction): t / k.

    Parameters
    ----------
    tolerance_pct : float
        The network's tolerance t in percent.

    Returns
    -------
    float
        Relative standard deviation (fraction).
    """
    return tolerance_pct / 100.0 / COVERAGE


def ratio_sigma(ratio_pct: float) -> float:
    """The relative standard deviation of the ratio of two members (fraction, first
    order): r / k.

    Parameters
    ----------
    ratio_pct : float
        The ratio tolerance r in percent.

    Returns
    -------
    float
        Relative standard deviation (fraction).
    """
    return ratio_pct / 100.0 / COVERAGE


def shared_sigma(tolerance_pct: float, ratio_pct: float) -> float:
    """Standard deviation of the shared error (fraction):
    sqrt((s_t^2 - sigma_m^2) / (1 + sigma_m^2)) with s_t = t / k, sigma_m = r / (k sqrt 2).

    Parameters
    ----------
    tolerance_pct : float
        The network's tolerance t in percent.
    ratio_pct : float
        The ratio tolerance r in percent.

    Returns
    -------
    float
        Relative standard deviation (fraction).
    """
    s_t = member_sigma(tolerance_pct)
    s_m = ratio_sigma(ratio_pct) / math.sqrt(2.0)
    return math.sqrt(max(0.0, s_t * s_t - s_m * s_m) / (1.0 + s_m * s_m))


# --- the design file ------------------------------------------------------------------------

def networks_from_dict(raw: Any, parts: Sequence["Part"], problems: list[InputError],
                       path: str = "networks") -> tuple[Network, ...]:
    """The design file's ``networks`` list, checked against ``parts``; every problem is
    appended to ``problems`` with its field path.

    Parameters
    ----------
    raw : list or None
        The file's ``networks`` list.
    parts : sequence of Part
        The design's parts.
    problems : list of InputError
        Each problem found is appended here.
    path : str
        Field path of ``raw``.

    Returns
    -------
    tuple[Network, ...]
        The networks that passed the checks.
    """
    if raw is None:
        return ()
    if not isinstance(raw, list):
        problems.append(InputError("must be a list of networks", path))
        return ()
    kinds = {p.ref: p.kind for p in parts}
    taken: dict[str, str] = {}  # member ref -> network name
    names: set[str] = set()
    out: list[Network] = []
    for i, item in enumerate(raw):
        where = f"{path}[{i}]"
        n_before = len(problems)
        if not isinstance(item, dict):
            problems.append(InputError("must be an object with name, members, tolerance_pct and ratio_pct", where))
            continue
        known = ("name", "members", "tolerance_pct", "ratio_pct", "tracking_ppm", "across_channels")
        problems += [InputError(f"unknown field {k!r}", f"{where}.{k}") for k in item if k not in known]
        problems += [InputError("is missing", f"{where}.{k}") for k in known[:4] if k not in item]
        if len(problems) > n_before:
            continue
        name = item["name"]
        if not isinstance(name, str) or not name.strip():
            problems.append(InputError("must be a non-empty text such as RN1", f"{where}.name"))
        elif name in names or name in kinds:
            problems.append(InputError(f"{name} is already the name of a network or a part", f"{where}.name"))
        members = item["members"]
        if not isinstance(members, list) or len(members) < 2 or not all(isinstance(m, str) for m in members):
            problems.append(InputError("must list at least two part refs, e.g. [\"R1\", \"R2\"]",
                                       f"{where}.members"))
            members = []
        for m in members:
            if m not in kinds:
                problems.append(InputError(f"unknown member {m!r}: no part has that ref", f"{where}.members"))
            elif kinds[m] == "opamp":
                problems.append(InputError(f"member {m} is an op-amp; a network holds R, C or L parts",
                                           f"{where}.members"))
            elif m in taken:
                problems.append(InputError(f"member {m} is already in network {taken[m]}", f"{where}.members"))
        if len(set(members)) != len(members):
            problems.append(InputError("lists a member twice", f"{where}.members"))
        member_kinds = {kinds[m] for m in members if m in kinds}
        if len(member_kinds) > 1:
            problems.append(InputError(f"members must be of one kind, not {', '.join(sorted(member_kinds))}",
                                       f"{where}.members"))
        tol = _figure(item, "tolerance_pct", where, problems, 0.0, MAX_TOLERANCE_PCT, "%", lo_open=True)
        ratio = _figure(item, "ratio_pct", where, problems, 0.0, math.inf, "%")
        if tol is not None and ratio is not None and ratio > math.sqrt(2.0) * tol * (1 + 1e-12):
            problems.append(InputError(
                f"must be from 0 to sqrt(2) x tolerance_pct ({math.sqrt(2.0) * tol:.4g} %): two independent "
                f"parts of +-{tol:g} % already have a ratio tolerance of that; not {ratio:g}", f"{where}.ratio_pct"))
        track = _figure(item, "tracking_ppm", where, problems, 0.0, MAX_TRACKING_PPM, "ppm/K") \
            if "tracking_ppm" in item else 0.0
        across = item.get("across_channels", False)
        if not isinstance(across, bool):
            problems.append(InputError("must be true or false", f"{where}.across_channels"))
        if len(problems) > n_before:
            continue
        names.add(name)
        for m in members:
            taken[m] = name
        out.append(Network(name, tuple(members), float(tol), float(ratio), float(track), across))
    return tuple(out)


def _figure(item: dict, key: str, where: str, problems: list[InputError], lo: float, hi: float,
            unit: str, lo_open: bool = False) -> float | None:
    v = item.get(key)
    if isinstance(v, bool) or not is_finite_number(v):
        problems.append(InputError(f"must be a finite number ({unit}), not {v!r}", f"{where}.{key}"))
        return None
    v = float(v)
    if (v <= lo if lo_open else v < lo) or v > hi:
        span = f"{'above' if lo_open else 'from'} {lo:g}" + ("" if hi == math.inf else f" to {hi:g}")
        problems.append(InputError(f"must be {span} {unit}, not {v:g}", f"{where}.{key}"))
        return None
    return v


def networks_to_dict(networks: Sequence[Network]) -> list[dict[str, Any]]:
    """The design file's ``networks`` list.

    Parameters
    ----------
    networks : sequence of Network
        The design's networks.

    Returns
    -------
    list[dict[str, Any]]
        JSON-ready data, one dict per network.
    """
    return [n.to_dict() for n in networks]


# --- sampling -------------------------------------------------------------------------------

def stream_seed(seed: int, *tags: int) -> int:
    """A seed (0 to 2^63-1) of its own stream for ``seed`` and ``tags``: scores drawn with it
    are independent of the design's part scores and of every other tag's.

    Parameters
    ----------
    seed : int
        The design's seed.
    *tags : int
        Numbers naming the stream.

    Returns
    -------
    int
        The stream's seed.
    """
    state = np.random.SeedSequence([int(seed), *map(int, tags)]).generate_state(2, np.uint32)
    return int((int(state[0]) << 31) ^ int(state[1]))


def shared_scores(seed: int, n_networks: int, start: int, stop: int, method: str,
                  channel: int = 0) -> np.ndarray:
    """Standard normal shared scores, shape (stop - start, 2 * n_networks): column j the
    value score of network j, column n_networks + j its temperature-coefficient score.
    From its own stream (:func:`stream_seed`), in the same blocks as the part scores, so
    boards [start, stop) are the same drawn at once or in chunks.

    Always pseudo-random (PCG64), whatever ``method``: a second scrambled Sobol sequence is
    not independent of the board's own (both scramble the same points, so the i-th points
    of the two agree in their leading bits up to a shift), which would correlate the shared
    errors with the parts' own scores.

    Parameters
    ----------
    seed : int
        The design's seed.
    n_networks : int
        Number of networks.
    start : int
        First board index.
    stop : int
        One past the last board index.
    method : str
        ``"random"`` or ``"sobol"`` (the board's method; these scores are pseudo-random either way).
    channel : int
        Channel number (0: the first).

    Returns
    -------
    np.ndarray
        (stop - start, 2 * n_networks) float standard scores.
    """
    if n_networks == 0:
        return np.empty((stop - start, 0))
    s = stream_seed(seed, _NETWORK_STREAM, channel)
    return draw_scores(s, n_networks, start, stop, "random")[:, :2 * n_networks]


def _member_index(design: "Design") -> list[tuple[int, np.ndarray]]:
    """(network number, member part indices) per network."""
    idx = {p.ref: i for i, p in enumerate(design.parts)}
    return [(j, np.array([idx[m] for m in n.members])) for j, n in enumerate(design.networks)]


def network_grades(design: "Design", grades: Sequence[Grade]) -> tuple[Grade, ...]:
    """``grades`` with each member's grade made the network's: no tolerance of its own (the
    network's errors are applied by :func:`board_values`) and a temperature coefficient
    spread of s + tracking / 2.

    Parameters
    ----------
    design : Design
        The design (its networks and parts).
    grades : sequence of Grade
        (P,) one grade per part, design order.

    Returns
    -------
    tuple[Grade, ...]
        (P,) grades, members changed.
    """
    out = list(grades)
    for (_, members), net in zip(_member_index(design), design.networks):
        for i in members:
            g = out[i]
            out[i] = replace(g, name=f"{g.name} in {net.name}", tolerance_pct=0.0,
                             tempco_spread_ppm=g.tempco_spread_ppm + net.tracking_ppm / 2)
    return tuple(out)


def corner_grades(design: "Design", grades: Sequence[Grade]) -> tuple[Grade, ...]:
    """Grades for worst-case corners: a member ranges over the network's tolerance and its
    temperature coefficient over s + tracking / 2 (a corner may set two members at
    opposite ends, which the ratio tolerance makes unlikely: corners stay pessimistic).

    Parameters
    ----------
    design : Design
        The design (its networks and parts).
    grades : sequence of Grade
        (P,) one grade per part, design order.

    Returns
    -------
    tuple[Grade, ...]
        (P,) grades, members changed.
    """
    out = list(network_grades(design, grades))
    for (_, members), net in zip(_member_index(design), design.networks):
        for i in members:
            out[i] = replace(out[i], tolerance_pct=net.tolerance_pct)
    return tuple(out)


def _tempco_scores(z_own: np.ndarray, z_shared: np.ndarray, spread: float, half_track: float) -> np.ndarray:
    """Scores that make sampling's uniform temperature coefficient TC0 + (s + h) u' equal
    TC0 + s u_c + h u_i: u' = (s u_c + h u_i) / (s + h), mapped back to a normal score."""
    u_own = 2 * special.ndtr(z_own) - 1
    u_shared = 2 * special.ndtr(z_shared) - 1
    u = (spread * u_shared + half_track * u_own) / (spread + half_track)
    return special.ndtri(np.clip((1 + u) / 2, 1e-12, 1 - 1e-12))


def board_values(design: "Design", nominal: np.ndarray, grades: Sequence[Grade], scores: np.ndarray,
                 conditions: Conditions, seed: int, method: str, start: int, channel: int = 0,
                 shared: np.ndarray | None = None) -> np.ndarray:
    """Part values of boards ``[start, start + S)`` (S, P), SI units, networks applied.

    Without networks this is exactly :func:`filters.sampling.part_values`. ``scores`` (S,
    4P + 1) are the part scores; ``shared`` the networks' shared scores (default: drawn by
    :func:`shared_scores` for ``channel``).

    Parameters
    ----------
    design : Design
        The design (its networks and parts).
    nominal : np.ndarray
        (P,) marked values in SI units.
    grades : sequence of Grade
        (P,) one grade per part, design order.
    scores : np.ndarray
        (S, 4P + 1) part scores.
    conditions : Conditions
        Temperature range (deg C), lot share, service hours and temperature.
    seed : int
        The design's seed.
    method : str
        ``"random"`` or ``"sobol"``.
    start : int
        First board index.
    channel : int
        Channel number (0: the first).
    shared : np.ndarray, optional
        (S, 2 * networks) shared scores (default: drawn).

    Returns
    -------
    np.ndarray
        (S, P) float part values in SI units.
    """
    if not design.networks:
        return part_values(nominal, grades, scores, conditions)
    p = len(nominal)
    n_net = len(design.networks)
    if shared is None:
        shared = shared_scores(seed, n_net, start, start + scores.shape[0], method, channel)
    sc = np.array(scores, copy=True)
    index = _member_index(design)
    for (j, members), net in zip(index, design.networks):  # networks, not boards
        for i in members:
            g = grades[i]
            if net.tracking_ppm or g.tempco_spread_ppm:  # temperature-coefficient column 2P + i
                sc[:, 2 * p + i] = _tempco_scores(scores[:, 2 * p + i], shared[:, n_net + j],
                                                  g.tempco_spread_ppm, net.tracking_ppm / 2)
    vals = part_values(nominal, network_grades(design, grades), sc, conditions)
    for (j, members), net in zip(index, design.networks):
        e_c = net.sigma_shared * np.clip(shared[:, j], -_CLIP, _CLIP)
        e_i = net.sigma_own * np.clip(scores[:, members], -_CLIP, _CLIP)  # own value scores
        vals[:, members] *= (1 + e_c)[:, None] * (1 + e_i)
    return vals


def shared_log_deviation(design: "Design", seed: int, method: str, start: int, stop: int,
                         channel: int = 0) -> np.ndarray:
    """ln(1 + e_c) of each network on boards ``[start, stop)``, shape (stop - start,
    networks): the part of each member's log deviation the whole network shares (what the
    spread budget gives the network instead of its members).

    Parameters
    ----------
    design : Design
        The design (its networks and parts).
    seed : int
        The design's seed.
    method : str
        ``"random"`` or ``"sobol"``.
    start : int
        First board index.
    stop : int
        One past the last board index.
    channel : int
        Channel number (0: the first).

    Returns
    -------
    np.ndarray
        (stop - start, networks) float (no unit).
    """
    n_net = len(design.networks)
    shared = shared_scores(seed, n_net, start, stop, method, channel)
    sig = np.array([n.sigma_shared for n in design.networks])
    return np.log1p(sig * np.clip(shared[:, :n_net], -_CLIP, _CLIP))
