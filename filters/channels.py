"""Channels that must match: N identical channels on one board.

A design with ``channels.count`` N > 1 describes one channel (its parts list and stages);
the board carries N copies. Each copy draws its own parts, except

- parts named in ``channels.shared``: one physical part serves every channel (same value
  in all channels);
- parts of one reel: ``analysis.lot_share`` applies across the channels as within one
  (the copies of a part have the same marked value and grade, so they share the lot score);
- a network with ``across_channels``: one package serves every channel, so its shared error
  is the same in all channels (each member's own ratio error is still its own).

Every channel must meet the ordinary spans; match spans (``kind`` "match",
:mod:`filters.mask`) limit the difference between any two channels (gain dB, phase deg,
group delay s) over their band. The evaluation (:mod:`filters.channel_match`) stacks the
channels as extra board rows, channel-major: rows ``[c S, (c + 1) S)`` are channel c.

Scores (common random numbers): channel 0 uses the board's own part scores, so channel 0
of a multi-channel board is the board a single-channel design would draw; channel c > 0
draws its own value, temperature-coefficient and drift scores from a stream of its own
(:func:`filters.networks.stream_seed`; pseudo-random even with Sobol sampling, as two
scrambled Sobol sequences are not independent), and keeps channel 0's lot and board-temperature
scores (one board, one reel, one temperature).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Sequence

import numpy as np

from .errors import InputError
from .grades import Grade
from .networks import board_values, shared_scores, stream_seed
from .sampling import Conditions, draw_scores

if TYPE_CHECKING:  # pragma: no cover
    from .design import Design, Part
    from .mask import Span

__all__ = [
    "MAX_CHANNELS",
    "Channels",
    "channels_from_dict",
    "check_match_spans",
    "channel_scores",
    "channel_values",
]

MAX_CHANNELS = 16
_CHANNEL_STREAM = 0x636861  # "cha": the tag of the channels' own score streams


@dataclass(frozen=True)
class Channels:
    """``count`` identical channels on one board; ``shared``: refs of parts that serve
    every channel (one physical part)."""

    count: int = 1
    shared: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {"count": self.count}
        if self.shared:
            d["shared"] = list(self.shared)
        return d


def channels_from_dict(raw: Any, parts: Sequence["Part"], problems: list[InputError],
                       path: str = "channels") -> Channels:
    """The design file's ``channels`` object, checked; problems are appended with their path.

    Parameters
    ----------
    raw : dict or None
        The file's ``channels`` object.
    parts : sequence of Part
        The design's parts.
    problems : list of InputError
        Each problem found is appended here.
    path : str
        Field path of ``raw``.

    Returns
    -------
    Channels
        The channel settings.
    """
    if raw is None:
        return Channels()
    if not isinstance(raw, dict):
        problems.append(InputError("must be an object such as {\"count\": 2}", path))
        return Channels()
    n_before = len(problems)
    problems += [InputError(f"unknown field {k!r}", f"{path}.{k}") for k in raw if k not in ("count", "shared")]
    count = raw.get("count", 1)
    if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= MAX_CHANNELS:
        problems.append(InputError(f"must be a whole number of channels from 1 to {MAX_CHANNELS}, not {count!r}",
                                   f"{path}.count"))
    shared = raw.get("shared", [])
    refs = {p.ref for p in parts}
    if not isinstance(shared, list) or not all(isinstance(r, str) for r in shared):
        problems.append(InputError("must be a list of part refs", f"{path}.shared"))
        shared = []
    for r in shared:
        if r not in refs:
            problems.append(InputError(f"unknown part {r!r}: no part has that ref", f"{path}.shared"))
    if len(problems) > n_before:
        return Channels()
    return Channels(int(count), tuple(shared))


def check_match_spans(mask: Sequence["Span"], paths: Sequence[str], channels: Channels,
                      problems: list[InputError]) -> None:
    """A match span needs two channels or more.

    Parameters
    ----------
    mask : sequence of Span
        The spec mask.
    paths : sequence of str
        Field path of each span.
    channels : Channels
        The channel settings.
    problems : list of InputError
        Each problem found is appended here.
    """
    for span, where in zip(mask, paths):
        if span.kind == "match" and channels.count < 2:
            problems.append(InputError(
                f"a match span limits the difference between channels, but the design has "
                f"{channels.count} channel; set channels.count to 2 or more", f"{where}.kind"))


def channel_scores(scores: np.ndarray, n_parts: int, seed: int, method: str, start: int, channel: int,
                   shared_refs_index: Sequence[int] = ()) -> np.ndarray:
    """Part scores of ``channel`` for boards ``[start, start + S)``, shape of ``scores``.

    Channel 0: ``scores`` itself. Channel c > 0: value columns [0, P), temperature-
    coefficient columns [2P, 3P) and drift columns [3P, 4P) from the channel's own stream;
    lot columns [P, 2P) and the board columns from 4P on from ``scores``; the columns of
    shared parts (``shared_refs_index``) from ``scores`` too.

    Parameters
    ----------
    scores : np.ndarray
        (S, 4P + 1) part scores of channel 0.
    n_parts : int
        Number of parts P.
    seed : int
        The design's seed.
    method : str
        ``"random"`` or ``"sobol"``.
    start : int
        First board index.
    channel : int
        Channel number (0: the first).
    shared_refs_index : sequence of int
        Indexes of the parts all channels share.

    Returns
    -------
    np.ndarray
        (S, 4P + 1) float standard scores.
    """
    if channel == 0:
        return scores
    p = n_parts
    # pseudo-random whatever ``method``: a second scrambled Sobol sequence would pair its points
    # with channel 1's (the same points, scrambled) and correlate the channels
    own = draw_scores(stream_seed(seed, _CHANNEL_STREAM, channel), p, start, start + scores.shape[0], "random")
    out = np.array(scores, copy=True)
    for lo, hi in ((0, p), (2 * p, 4 * p)):
        out[:, lo:hi] = own[:, lo:hi]
    for i in shared_refs_index:
        out[:, [i, 2 * p + i, 3 * p + i]] = scores[:, [i, 2 * p + i, 3 * p + i]]
    return out


def channel_values(design: "Design", nominal: np.ndarray, grades: Sequence[Grade], scores: np.ndarray,
                   conditions: Conditions, seed: int, method: str, start: int) -> np.ndarray:
    """Part values of every channel of boards ``[start, start + S)``, shape (N, S, P), SI
    units (channel 0 first; networks applied as :func:`filters.networks.board_values`).

    Parameters
    ----------
    design : Design
        The design.
    nominal : np.ndarray
        (P,) marked values in SI units.
    grades : sequence of Grade
        (P,) one grade per part, design order.
    scores : np.ndarray
        (S, 4P + 1) part scores of channel 0.
    conditions : Conditions
        Temperature range (deg C), lot share, service hours and temperature.
    seed : int
        The design's seed.
    method : str
        ``"random"`` or ``"sobol"``.
    start : int
        First board index.

    Returns
    -------
    np.ndarray
        (N, S, P) float part values in SI units.
    """
    n = design.channels.count
    p = len(nominal)
    stop = start + scores.shape[0]
    shared_idx = [i for i, part in enumerate(design.parts) if part.ref in design.channels.shared]
    first_shared = shared_scores(seed, len(design.networks), start, stop, method, 0)
    out = np.empty((n, scores.shape[0], p))
    for c in range(n):  # channels, not boards
        sc = channel_scores(scores, p, seed, method, start, c, shared_idx)
        net_sc = first_shared if c == 0 else shared_scores(seed, len(design.networks), start, stop, method, c)
        if c > 0 and design.networks:
            across = [j for j, net in enumerate(design.networks) if net.across_channels]
            k = len(design.networks)
            for j in across:
                net_sc[:, [j, k + j]] = first_shared[:, [j, k + j]]
        out[c] = board_values(design, nominal, grades, sc, conditions, seed, method, start, c, net_sc)
    if shared_idx:  # one physical part: its value in every channel is channel 1's (network members too)
        out[1:, :, shared_idx] = out[0][:, shared_idx]
    return out
