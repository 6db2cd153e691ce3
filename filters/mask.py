"""The spec mask: floor spans (the response must stay at or above) and ceiling spans
(the response must stay at or below), each over a frequency interval [f1, f2] in Hz.

A gain span's limit is in dB and may slope linearly in dB against log frequency from
``limit1`` at f1 to ``limit2`` at f2. It is absolute, or relative to the nominal design's
passband reference gain (``relative``). A phase span limits the phase in degrees the same
way. A delay span limits the group delay's variation (max - min, seconds) over its band.

A match span (``kind`` "match", designs of two or more channels: :mod:`filters.channels`)
limits the difference between any two channels over its band: gain difference (dB), phase
difference (degrees) or group-delay difference (seconds), by its ``quantity``; its limit
is above 0 and may slope like a gain limit.
"""
from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields, replace
from typing import Any, Literal

import numpy as np

from .errors import InputError, ValidationError, is_finite_number

__all__ = [
    "Quantity",
    "SpanKind",
    "QUANTITIES",
    "Span",
    "edge_frequencies",
]

Quantity = Literal["gain", "phase", "delay"]
SpanKind = Literal["floor", "ceiling", "variation", "match"]
QUANTITIES: tuple[str, ...] = ("gain", "phase", "delay")


@dataclass(frozen=True)
class Span:
    """One piece of the mask. Frequencies in Hz; limits in dB (gain), degrees (phase) or
    seconds (delay variation, ``limit1`` only)."""

    kind: SpanKind
    f1: float
    f2: float
    limit1: float
    limit2: float | None = None
    quantity: Quantity = "gain"
    relative: bool = False
    name: str = ""

    @property
    def end_limit(self) -> float:
        return self.limit1 if self.limit2 is None else self.limit2

    @property
    def label(self) -> str:
        return self.name or f"{self.quantity} {self.kind} {self.f1:g}-{self.f2:g} Hz"

    def limit_at(self, f_hz: np.ndarray) -> np.ndarray:
        """The limit at frequencies ``f_hz`` (inside the span), linear in log frequency."""
        if self.limit2 is None or self.limit2 == self.limit1:
            return np.full(np.shape(f_hz), float(self.limit1))
        t = (np.log(f_hz) - math.log(self.f1)) / (math.log(self.f2) - math.log(self.f1))
        return self.limit1 + t * (self.limit2 - self.limit1)

    def moved(self, **changes: Any) -> "Span":
        return replace(self, **changes)

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)  # "quantity" is always written (design-file version 2)
        if d["limit2"] is None:
            del d["limit2"]
        if not d["name"]:
            del d["name"]
        return d

    @staticmethod
    def from_dict(data: Any, path: str = "span") -> "Span":
        """Build a span from a design file's dict; every problem is reported with its path."""
        if not isinstance(data, dict):
            raise InputError("must be an object with kind, f1, f2 and limit1", path)
        known = {f.name for f in fields(Span)}
        problems = [InputError(f"unknown field {k!r}", f"{path}.{k}") for k in data if k not in known]
        problems += [InputError("is missing", f"{path}.{k}") for k in ("kind", "f1", "f2", "limit1")
                     if k not in data]
        if problems:
            raise ValidationError(problems)
        quantity = data.get("quantity", "gain")
        if quantity not in QUANTITIES:
            problems.append(InputError(f"must be one of {', '.join(QUANTITIES)}", f"{path}.quantity"))
        kinds = ("variation", "match") if quantity == "delay" else ("floor", "ceiling", "match")
        if data["kind"] not in kinds:
            problems.append(InputError(f"must be {' or '.join(kinds)} for a {quantity} span", f"{path}.kind"))
        nums: dict[str, float] = {}
        for k in ("f1", "f2", "limit1", "limit2"):
            if k not in data or (k == "limit2" and data[k] is None):
                continue
            v = data[k]
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not is_finite_number(v):
                problems.append(InputError(f"must be a finite number, not {v!r}", f"{path}.{k}"))
            else:
                nums[k] = float(v)
        if "relative" in data and not isinstance(data["relative"], bool):
            problems.append(InputError("must be true or false", f"{path}.relative"))
        if "name" in data and not isinstance(data["name"], str):
            problems.append(InputError("must be a text", f"{path}.name"))
        if "f1" in nums and "f2" in nums:
            if nums["f1"] <= 0:
                problems.append(InputError("must be above 0 Hz", f"{path}.f1"))
            if nums["f1"] >= nums["f2"]:
                problems.append(InputError(f"f1 ({nums['f1']:g} Hz) must be below f2 ({nums['f2']:g} Hz)",
                                           f"{path}.f2"))
        if quantity == "delay" and nums.get("limit1", 1.0) <= 0:
            problems.append(InputError("a delay variation limit must be above 0 s", f"{path}.limit1"))
        if data["kind"] == "match":
            for k in ("limit1", "limit2"):
                if nums.get(k, 1.0) <= 0:
                    problems.append(InputError("a match span limits a difference between channels: "
                                               "its limit must be above 0", f"{path}.{k}"))
            if data.get("relative", False) is True:
                problems.append(InputError("a match span is a difference already; it cannot be relative",
                                           f"{path}.relative"))
        if problems:
            raise ValidationError(problems)
        return Span(kind=data["kind"], f1=nums["f1"], f2=nums["f2"], limit1=nums["limit1"],
                    limit2=nums.get("limit2"), quantity=quantity,
                    relative=bool(data.get("relative", False)), name=data.get("name", ""))


def edge_frequencies(spans: tuple[Span, ...] | list[Span]) -> np.ndarray:
    """Every span edge in Hz, sorted and unique (they become grid points).

    Parameters
    ----------
    spans : sequence of Span
        The spec mask.

    Returns
    -------
    np.ndarray
        (E,) float edge frequencies in Hz, ascending.
    """
    return np.unique(np.array([f for s in spans for f in (s.f1, s.f2)], dtype=float))
