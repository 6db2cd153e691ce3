"""The design: parts with their grades, stages of topologies, analysis settings, spec mask.

Over 500 lines: the design's dataclasses beside the loader's rule for each field (the window checks edits with them).

Plain frozen dataclasses, built from the design file's dict form by :func:`design_from_dict`.
Loading checks the whole dict and reports every problem with its field path, not only the
first. Writing the dict form (``design_to_dict``) and checking a design through it
(``check_design``) live in :mod:`filters.designfile`, which imports this module, never the reverse.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any

from .errors import InputError, ValidationError, is_finite_number, quoted
from .channels import Channels, channels_from_dict, check_match_spans
from .grades import Catalog, Grade, builtin_catalog, scaled
from .measured import Measured, measured_from_dict, measured_grade
from .constraints import Purchase, purchase_from_dict
from .mask import Span
from .metric_names import SPAN_UNIT, duplicate_label
from .networks import Network, networks_from_dict
from .sampling import METHODS, Conditions
from .temperature_settings import settings_from_dict as temperature_settings
from .temperature_physics import for_value
from .circuit import part_kinds
from .stage import Stage, check_networks, stage_from_dict
from .values import format_value, parse_value

__all__ = [
    "MAX_SAMPLES",
    "MAX_SEED",
    "MAX_PARTS",
    "VALUE_RANGE",
    "GAIN_LIMIT_DB",
    "SPAN_LIMITS",
    "MAX_TEMPERATURE_SHIFT",
    "MAX_POINTS",
    "INTERVALS",
    "Part",
    "Stage",
    "Analysis",
    "Design",
    "check_part_value",
    "check_seed",
    "check_span_limit",
    "check_span_limits",
    "analysis_from_dict",
    "design_from_dict",
]

MAX_SAMPLES = 10_000_000
MAX_SEED = 2**63 - 1  # seeds are 0 to 2^63-1 everywhere: design file, command line, window
# Parts in one design: the guided corner search evaluates about 4 x parts x metrics designs
# per round (its work grows with the cube of the part count: 100 parts take about 30 s
# here); memory stays bounded at any count (filters/memory.py, benchmarks/memory.py).
MAX_PARTS = 100
VALUE_RANGE = (1e-15, 1e15)  # SI units: beyond this no real part exists and the numbers overflow
GAIN_LIMIT_DB = 1000.0       # mask limits beyond +-1000 dB are certainly typing errors
# The largest mask limit of each quantity (gain dB, phase degrees, delay variation seconds):
# beyond them a limit is a typing error, and margins of ~1e300 overflow the statistics.
SPAN_LIMITS = {"gain": GAIN_LIMIT_DB, "phase": 100_000.0, "delay": 1e12}
MAX_TEMPERATURE_SHIFT = 0.5  # a temperature coefficient may move a value by at most 50 % over the range
MAX_POINTS = 5000
INTERVALS = ("wilson", "exact")


@dataclass(frozen=True)
class Part:
    """A part on the board: reference designator, marked value (SI units) and grade name.

    ``kind`` is R, C, L or opamp (for an op-amp the value is its gain-bandwidth in Hz).
    ``text`` keeps the value as the user wrote it (``4k7``), for display.
    """

    ref: str
    kind: str
    value: float
    grade: str
    text: str = field(default="", compare=False)
    tolerance_pct: float | None = None  # a what-if tolerance replacing the grade's
    bias_v: float = 0.0  # DC bias across the part (V): class II capacitors lose value with it
    measured: Measured | None = None  # measured values replacing the grade's distribution (filters/measured.py)
    locked: bool = False  # a grade search keeps this part's grade
    forbid: tuple[str, ...] = ()  # technologies a grade search must not give this part (grades' technology)

    @property
    def value_text(self) -> str:
        return self.text or format_value(self.value)


@dataclass(frozen=True)
class Analysis:
    """Analysis settings. Frequencies in Hz, temperatures in deg C, cutoff_db in dB."""

    samples: int = 5000
    seed: int = 1
    f_start: float = 10.0
    f_stop: float = 1e6
    points: int = 400
    method: str = "random"
    cutoff_db: float = 3.0
    temp_low_c: float = 25.0
    temp_high_c: float = 25.0
    lot_share: float = 0.0
    interval: str = "wilson"
    confidence: float = 0.95
    attenuation_hz: tuple[float, ...] = ()  # report the attenuation at these frequencies (Hz)
    # judged over a range and after a service life (filters/temperature.py; None/0: not asked)
    operating_range_c: tuple[float, float] | None = None  # deg C
    judge_at_c: tuple[float, ...] = ()  # extra judged temperatures inside the range (deg C)
    service_hours: float = 0.0          # time in service (h) ...
    service_temp_c: float = 25.0        # ... at this temperature (deg C)

    @property
    def conditions(self) -> Conditions:
        return Conditions(self.temp_low_c, self.temp_high_c, self.lot_share)


@dataclass(frozen=True)
class Design:
    """Everything a design file holds. ``grades`` are the design's own grades, added to
    (or replacing by name) the built-in catalog."""

    parts: tuple[Part, ...]
    stages: tuple[Stage, ...]
    analysis: Analysis = Analysis()
    mask: tuple[Span, ...] = ()
    name: str = ""
    description: str = ""
    grades: tuple[Grade, ...] = ()
    networks: tuple[Network, ...] = ()  # resistor networks and matched pairs (filters/networks.py)
    channels: Channels = Channels()     # identical channels on one board (filters/channels.py)
    purchase: Purchase = Purchase()     # boards bought, currency, signal-path limits (filters/constraints.py)
    revision: str = ""                  # the design's revision and author, for the report's title block
    author: str = ""

    @property
    def catalog(self) -> Catalog:
        cat = builtin_catalog()
        for g in self.grades:
            cat = cat.with_grade(g)
        return cat

    def part_grades(self) -> tuple[Grade, ...]:
        """Each part's grade as it applies to the part's value
        (:func:`filters.temperature_physics.for_value`), with a part's what-if tolerance
        applied where it has one. A part that states no bias of its own sits at the bias its
        stage states (``Stage.bias_v``, V)."""
        cat = self.catalog
        stage_bias = {ref: st.bias_v for st in reversed(self.stages) if st.bias_v for ref in st.roles.values()}
        out = []
        for p in self.parts:
            g = cat[p.grade]
            bias = p.bias_v or stage_bias.get(p.ref, 0.0)  # the part's own bias wins
            g = for_value(g, p.kind, p.value, bias)  # pF tolerance below 10 pF, tempco by range, bias
            if p.measured is not None:  # measured values replace the distribution (filters/measured.py)
                g = measured_grade(g, p.value, p.measured, p.ref)
            out.append(g if p.tolerance_pct is None else scaled(g, p.tolerance_pct))
        return tuple(out)

    def part_index(self, ref: str) -> int:
        for i, p in enumerate(self.parts):
            if p.ref == ref:
                return i
        raise InputError(f"no part {ref!r}", "parts")

    def with_part(self, ref: str, **changes: Any) -> "Design":
        """A copy with part ``ref`` changed (value, grade, text)."""
        i = self.part_index(ref)
        parts = list(self.parts)
        parts[i] = replace(parts[i], **changes)
        return replace(self, parts=tuple(parts))

    def with_mask(self, mask: tuple[Span, ...]) -> "Design":
        return replace(self, mask=tuple(mask))

    def with_analysis(self, **changes: Any) -> "Design":
        return replace(self, analysis=replace(self.analysis, **changes))


def check_part_value(raw: Any, path: str = "value") -> tuple[float, str]:
    """The loader's rule for a part's value, for the design file and the window alike.

    ``raw`` is text (SI prefixes, RKM codes: "4k7", "10 nF") or a number; the value must be
    finite, above 0 and within :data:`VALUE_RANGE` (SI units). Returns the value in SI
    units and the text to keep ("" for a number). Raises :class:`InputError` at ``path``.

    Parameters
    ----------
    raw : str or float
        The value as written.
    path : str
        Field path named in an error.

    Returns
    -------
    tuple[float, str]
        The value in SI units and its text.
    """
    text = ""
    if isinstance(raw, str):
        value = parse_value(raw, path)
        text = raw.strip()
    elif isinstance(raw, (int, float)) and not isinstance(raw, bool):
        value = float(raw) if is_finite_number(raw) else math.nan
    else:
        raise InputError(f"must be a value such as 4.7k or 4k7, not {quoted(raw)}", path)
    if not math.isfinite(value) or value <= 0:
        raise InputError(f"must be a finite value above 0, not {quoted(raw)}", path)
    if not VALUE_RANGE[0] <= value <= VALUE_RANGE[1]:
        raise InputError(f"{quoted(raw)} is outside the {VALUE_RANGE[0]:g} to {VALUE_RANGE[1]:g} "
                         "(SI units) a part may have", path)
    return value, text


def check_seed(raw: Any, path: str = "analysis.seed") -> int:
    """The loader's rule for a seed, for the file, the command line and the window alike:
    a whole number from 0 to :data:`MAX_SEED` (text of digits, "1,000" and "1_000" too).
    Returns it as an int; raises :class:`InputError` at ``path``.

    Parameters
    ----------
    raw : int or str
        The seed as written.
    path : str
        Field path named in an error.

    Returns
    -------
    int
        The seed.
    """
    if isinstance(raw, str):
        digits = raw.strip().replace(",", "").replace("_", "")
        if digits.startswith("-") and digits[1:].isdigit():
            raise InputError(f"must not be negative (a seed is 0 to {MAX_SEED}), not {quoted(raw.strip())}", path)
        if not digits.isdigit() or not digits.isascii():
            raise InputError(f"must be a whole number from 0 to {MAX_SEED}, not {quoted(raw.strip())}", path)
        if len(digits.lstrip("0")) > len(str(MAX_SEED)):
            raise InputError(f"must be at most {MAX_SEED}, not {quoted(raw.strip())}", path)
        raw = int(digits)
    if isinstance(raw, bool) or not isinstance(raw, int):
        raise InputError(f"must be a whole number from 0 to {MAX_SEED}, not {quoted(raw)}", path)
    if raw < 0:
        raise InputError(f"must not be negative (a seed is 0 to {MAX_SEED}), not {quoted(raw)}", path)
    if raw > MAX_SEED:
        raise InputError(f"must be a whole number from 0 to {MAX_SEED}, not {quoted(raw)}", path)
    return raw


def check_span_limit(quantity: str, limit: Any, path: str = "limit1") -> float:
    """The loader's rule for one mask limit of ``quantity`` (gain in dB, phase in degrees,
    delay variation in seconds): a finite number within +-:data:`SPAN_LIMITS` (a delay
    variation above 0). Returns it as a float; raises :class:`InputError` at ``path``.

    Parameters
    ----------
    quantity : str
        ``"gain"``, ``"phase"`` or ``"delay"``.
    limit : float or str
        The limit as written.
    path : str
        Field path named in an error.

    Returns
    -------
    float
        The limit in dB, deg or s.
    """
    if quantity not in SPAN_LIMITS:
        raise InputError(f"unknown quantity {quoted(quantity)}; known: {', '.join(SPAN_LIMITS)}", path)
    if not is_finite_number(limit):
        raise InputError(f"must be a finite number, not {quoted(limit)}", path)
    v, top, unit = float(limit), SPAN_LIMITS[quantity], SPAN_UNIT[quantity]
    if quantity == "delay" and not 0 < v <= top:
        raise InputError(f"a delay variation limit must be above 0 s and at most {top:g} s, not {v:g} s", path)
    if abs(v) > top:
        raise InputError(f"a {quantity} limit of {v:g} {unit} is beyond +-{top:g} {unit}", path)
    return v


def check_span_limits(span: Span, path: str = "span") -> None:
    """:func:`check_span_limit` on both limits of ``span`` (paths ``path.limit1/2``).

    Parameters
    ----------
    span : Span
        The span.
    path : str
        Field path of the span.

    Raises
    ------
    InputError
        When a limit breaks the rule.
    """
    check_span_limit(span.quantity, span.limit1, f"{path}.limit1")
    if span.limit2 is not None:
        check_span_limit(span.quantity, span.limit2, f"{path}.limit2")


def _number(data: dict, key: str, path: str, problems: list[InputError], default: Any, *,
            integer: bool = False, lo: float | None = None, hi: float | None = None,
            lo_open: bool = False) -> Any:
    if key not in data:
        return default
    v = data[key]
    where = f"{path}.{key}"
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        problems.append(InputError(f"must be a number, not {v!r}", where))
        return default
    if not is_finite_number(v):
        problems.append(InputError(f"must be finite, not {v!r}", where))
        return default
    if integer and v != int(v):
        problems.append(InputError(f"must be a whole number, not {v!r}", where))
        return default
    if lo is not None and (v <= lo if lo_open else v < lo):
        problems.append(InputError(f"must be {'above' if lo_open else 'at least'} {lo:g}, not {v:g}", where))
        return default
    if hi is not None and v > hi:
        problems.append(InputError(f"must be at most {hi:g}, not {v:g}", where))
        return default
    return int(v) if integer else float(v)


def analysis_from_dict(data: Any, problems: list[InputError], path: str = "analysis") -> Analysis:
    """The analysis settings of a design file, checked.

    Parameters
    ----------
    data : dict or None
        The file's ``analysis`` object (None: every default).
    problems : list of InputError
        Each problem found is appended here (with its field path).
    path : str
        Field path of ``data``.

    Returns
    -------
    Analysis
        The settings (frequencies in Hz, temperatures in deg C), defaults where a field is
        missing or wrong.
    """
    if data is None:
        return Analysis()
    if not isinstance(data, dict):
        problems.append(InputError("must be an object", path))
        return Analysis()
    known = {"samples", "seed", "f_start", "f_stop", "points", "method", "cutoff_db",
             "temperature_c", "lot_share", "interval", "confidence", "attenuation_at_hz",
             "operating_range_c", "judge_at_c", "service_life"}
    problems += [InputError(f"unknown setting {k!r}", f"{path}.{k}") for k in data if k not in known]
    d = Analysis()
    samples = _number(data, "samples", path, problems, d.samples, integer=True, lo=1, hi=MAX_SAMPLES)
    seed = _number(data, "seed", path, problems, d.seed, integer=True, lo=0, hi=MAX_SEED)
    f_start = _number(data, "f_start", path, problems, d.f_start, lo=0, lo_open=True)
    f_stop = _number(data, "f_stop", path, problems, d.f_stop, lo=0, lo_open=True)
    points = _number(data, "points", path, problems, d.points, integer=True, lo=20, hi=MAX_POINTS)
    cutoff_db = _number(data, "cutoff_db", path, problems, d.cutoff_db, lo=0, hi=60, lo_open=True)
    lot = _number(data, "lot_share", path, problems, d.lot_share, lo=0, hi=1)
    conf = _number(data, "confidence", path, problems, d.confidence, lo=0.5, hi=0.9999)
    if f_start >= f_stop:
        problems.append(InputError(f"must be above f_start ({f_start:g} Hz)", f"{path}.f_stop"))
    elif f_stop / f_start > 1e12:
        problems.append(InputError("the range may span at most 12 decades", f"{path}.f_stop"))
    method = data.get("method", d.method)
    if method not in METHODS:
        problems.append(InputError(f"must be one of {', '.join(METHODS)}, not {method!r}", f"{path}.method"))
        method = d.method
    interval = data.get("interval", d.interval)
    if interval not in INTERVALS:
        problems.append(InputError(f"must be one of {', '.join(INTERVALS)}, not {interval!r}", f"{path}.interval"))
        interval = d.interval
    t_lo, t_hi = d.temp_low_c, d.temp_high_c
    if "temperature_c" in data:
        t = data["temperature_c"]
        if (not isinstance(t, list) or len(t) != 2
                or not all(is_finite_number(x) for x in t)):
            problems.append(InputError("must be [low, high] in deg C (equal ends for a fixed temperature)",
                                       f"{path}.temperature_c"))
        elif not -273.15 < t[0] <= t[1] < 1000:
            problems.append(InputError("must be [low, high] with low <= high, above -273.15 deg C",
                                       f"{path}.temperature_c"))
        else:
            t_lo, t_hi = float(t[0]), float(t[1])
    att: tuple[float, ...] = ()
    if "attenuation_at_hz" in data:
        raw = data["attenuation_at_hz"]
        if (not isinstance(raw, list) or len(raw) > 20
                or not all(is_finite_number(v) and v > 0 for v in raw)):
            problems.append(InputError("must be a list of up to 20 frequencies above 0 Hz",
                                       f"{path}.attenuation_at_hz"))
        else:
            att = tuple(float(v) for v in raw)
    return Analysis(samples, seed, f_start, f_stop, points, method, cutoff_db, t_lo, t_hi, lot,
                    interval, conf, att, **temperature_settings(data, problems, path))


def design_from_dict(data: Any) -> Design:
    """Build a :class:`Design` from its dict form, checking everything.

    Raises :class:`ValidationError` listing every problem with its field path.

    Parameters
    ----------
    data : dict
        The design file's dict form (current format).

    Returns
    -------
    Design
        The design.
    """
    problems: list[InputError] = []
    if not isinstance(data, dict):
        raise ValidationError([InputError("a design must be a JSON object", "")])
    known = {"format", "version", "name", "description", "revision", "author", "parts", "stages", "analysis",
             "mask", "grades", "networks", "channels", "purchase"}
    problems += [InputError(f"unknown field {k!r}", k) for k in data if k not in known]
    for k in ("name", "description", "revision", "author"):
        if k in data and not isinstance(data[k], str):
            problems.append(InputError("must be a text", k))
    for k in ("revision", "author"):  # one line each in the report's title block
        if isinstance(data.get(k), str) and (len(data[k]) > 200 or "\n" in data[k]):
            problems.append(InputError("must be one line of at most 200 characters", k))

    # Grades of the design's own, on top of the built-in catalog.
    grades: list[Grade] = []
    raw_grades = data.get("grades", [])
    if not isinstance(raw_grades, list):
        problems.append(InputError("must be a list of grades", "grades"))
        raw_grades = []
    refused: set[str] = set()  # names of the design's grades that were refused (reported once)
    for i, g in enumerate(raw_grades):
        try:
            grades.append(Grade.from_dict(g, f"grades[{i}]"))
        except ValidationError as exc:
            problems += exc.problems
        except InputError as exc:
            problems.append(exc)
        else:
            continue
        if isinstance(g, dict) and isinstance(g.get("name"), str):
            refused.add(g["name"])
    catalog = builtin_catalog()
    for g in grades:
        catalog = catalog.with_grade(g)

    # Stages first: they say which kind each part must be.
    stages: list[Stage] = []
    role_kind: dict[str, tuple[str, str]] = {}  # ref -> (kind, where)
    raw_stages = data.get("stages")
    if not isinstance(raw_stages, list) or not raw_stages:
        problems.append(InputError("must be a non-empty list of stages", "stages"))
        raw_stages = []
    kinds = part_kinds(data.get("parts"), {g.name: g.kind for g in catalog.grades})

    def claim(ref: str, kind: str, where: str, what: str) -> None:
        if ref in role_kind:
            problems.append(InputError(f"{what + ': ' if what else ''}part {ref} already fills "
                                       f"{role_kind[ref][1]}; one part, one place", where))
        else:
            role_kind[ref] = (kind, where)

    for i, raw_stage in enumerate(raw_stages):
        stage = stage_from_dict(raw_stage, f"stages[{i}]", kinds, claim, problems)
        if stage is not None:
            stages.append(stage)

    parts: list[Part] = []
    raw_parts = data.get("parts")
    if not isinstance(raw_parts, list) or not raw_parts:
        problems.append(InputError("must be a non-empty list of parts", "parts"))
        raw_parts = []
    elif len(raw_parts) > MAX_PARTS:
        problems.append(InputError(f"at most {MAX_PARTS} parts in one design, not {len(raw_parts)}", "parts"))
    seen: set[str] = set()
    for i, p in enumerate(raw_parts):
        path = f"parts[{i}]"
        if not isinstance(p, dict):
            problems.append(InputError("must be an object with ref, value and grade", path))
            continue
        problems += [InputError(f"unknown field {k!r}", f"{path}.{k}") for k in p
                     if k not in ("ref", "value", "grade", "tolerance_pct", "bias_v", "measured", "locked", "forbid")]
        ref = p.get("ref")
        if not isinstance(ref, str) or not ref.strip():
            problems.append(InputError("must be a reference designator such as R1", f"{path}.ref"))
            continue
        if ref in seen:
            problems.append(InputError(f"reference designator {ref} is used twice", f"{path}.ref"))
            continue
        seen.add(ref)
        if ref not in role_kind:
            problems.append(InputError(f"part {ref} fills no role in any stage", f"{path}.ref"))
            continue
        kind = role_kind[ref][0]
        try:
            value, text = check_part_value(p.get("value"), f"{path}.value")
        except InputError as exc:
            problems.append(exc)
            continue
        grade = p.get("grade")
        if isinstance(grade, str) and grade in refused and grade not in catalog:
            continue  # the grade's own problem is reported already
        if not isinstance(grade, str) or grade not in catalog:
            problems.append(InputError(f"unknown grade {grade!r}; for a {kind} part use one of "
                                       f"{', '.join(g.name for g in catalog.for_kind(kind))}", f"{path}.grade"))
            continue
        if not catalog[grade].fits(kind):
            problems.append(InputError(f"grade {grade} is for {catalog[grade].kind} parts, but {ref} "
                                       f"is a {kind} part", f"{path}.grade"))
            continue
        tol = None
        if "tolerance_pct" in p and p["tolerance_pct"] is not None:
            t = p["tolerance_pct"]
            if not is_finite_number(t) or not 0 <= t < 100:
                problems.append(InputError(f"must be a tolerance from 0 to below 100 %, not {t!r}",
                                           f"{path}.tolerance_pct"))
                continue
            tol = float(t)
        bias = p.get("bias_v", 0.0)
        if not is_finite_number(bias) or abs(bias) > 10_000:
            problems.append(InputError(f"must be a DC bias in V within +-10000, not {bias!r}", f"{path}.bias_v"))
            continue
        measured = None
        if p.get("measured") is not None:
            try:
                measured = measured_from_dict(p["measured"], f"{path}.measured")
            except InputError as exc:
                problems.append(exc)
                continue
            if kind not in ("R", "C", "L"):
                problems.append(InputError(f"measured values are for R, C and L parts, not {kind}", f"{path}.measured"))
                continue
        locked = p.get("locked", False)
        if not isinstance(locked, bool):
            problems.append(InputError("must be true or false", f"{path}.locked"))
            continue
        forbid = p.get("forbid", [])
        if not isinstance(forbid, list) or not all(isinstance(x, str) and x.strip() for x in forbid):
            problems.append(InputError("must be a list of technology names such as \"X7R\"", f"{path}.forbid"))
            continue
        parts.append(Part(ref, kind, value, grade, text, tol, float(bias), measured, locked,
                          tuple(x.strip() for x in forbid)))
    for ref, (kind, where) in role_kind.items():
        if ref not in seen:
            problems.append(InputError(f"part {ref} is not in the parts list", where))

    networks = networks_from_dict(data.get("networks"), parts, problems)
    purchase = purchase_from_dict(data.get("purchase"), problems)
    channels = channels_from_dict(data.get("channels"), parts, problems)
    analysis = analysis_from_dict(data.get("analysis"), problems)
    t_ends = (analysis.temp_low_c, analysis.temp_high_c) + (analysis.operating_range_c or ())
    dt = max(abs(t - 25.0) for t in t_ends)
    for i, part in enumerate(parts):
        g = catalog[part.grade]
        shift = (abs(g.tempco_ppm) + g.tempco_spread_ppm) * 1e-6 * dt
        if shift > MAX_TEMPERATURE_SHIFT:
            problems.append(InputError(
                f"grade {g.name}'s temperature coefficient would move {part.ref} by up to {100 * shift:.0f} % "
                f"over {analysis.temp_low_c:g} to {analysis.temp_high_c:g} deg C; no part behaves so",
                "analysis.temperature_c"))

    mask: list[Span] = []
    mask_paths: list[str] = []
    raw_mask = data.get("mask", [])
    if not isinstance(raw_mask, list):
        problems.append(InputError("must be a list of spans", "mask"))
        raw_mask = []
    for i, m in enumerate(raw_mask):
        try:
            span = Span.from_dict(m, f"mask[{i}]")
        except ValidationError as exc:
            problems += exc.problems
            continue
        except InputError as exc:
            problems.append(exc)
            continue
        if span.f1 < analysis.f_start * (1 - 1e-12) or span.f2 > analysis.f_stop * (1 + 1e-12):
            problems.append(InputError(
                f"span {span.f1:g}-{span.f2:g} Hz lies outside the analysed range "
                f"{analysis.f_start:g}-{analysis.f_stop:g} Hz", f"mask[{i}]"))
            continue
        try:
            check_span_limits(span, f"mask[{i}]")
        except InputError as exc:
            problems.append(exc)
            continue
        mask.append(span)
        mask_paths.append(f"mask[{i}]")
    twins = duplicate_label(mask)
    if twins is not None:  # one margin name for two spans: their results would merge
        first, second = (mask_paths[k] for k in twins)
        label = mask[twins[1]].label
        what = f"named {quoted(label)}" if mask[twins[1]].name else f"labelled {quoted(label)} (give one a name)"
        problems.append(InputError(f"two spans are {what} ({first} and {second}); span names must be unique",
                                   f"{second}.name"))
    check_match_spans(mask, mask_paths, channels, problems)
    if not problems:  # the rules on whole networks need every part's value
        check_networks(tuple(stages), {p.ref: p.value for p in parts},
                       (analysis.f_start, math.sqrt(analysis.f_start * analysis.f_stop), analysis.f_stop), problems)
    if problems:
        raise ValidationError(problems)
    return Design(tuple(parts), tuple(stages), analysis, tuple(mask), data.get("name", ""),
                  data.get("description", ""), tuple(grades), networks, channels, purchase,
                  data.get("revision", ""), data.get("author", ""))
