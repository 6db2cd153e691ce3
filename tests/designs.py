"""Design builders shared by the engine tests (not a test module)."""
from __future__ import annotations

import math

import numpy as np

from tolspread.design import design_from_dict
from tolspread.engine import compile_design


def butter_q(n: int) -> list[float]:
    """The Q of each second-order section of an ``n``-th order Butterworth low-pass (n // 2 values)."""
    # source: Butterworth poles at angles (2k - 1) pi / (2n) from the imaginary axis (Williams & Taylor,
    # "Electronic Filter Design Handbook"): Q_k = 1 / (2 sin((2k - 1) pi / (2n))), from memory; agrees
    # with Carter & Mancini, "Op Amps for Everyone", 5th ed., Table 16.7 to its four decimals
    return [1 / (2 * math.sin((2 * k - 1) * math.pi / (2 * n))) for k in range(1, n // 2 + 1)]


def sk_unity(f0: float, q: float, r: float = 10e3) -> dict[str, float]:
    """Unity-gain Sallen-Key low-pass parts for ``f0`` (Hz) and ``q``: R1 = R2 = ``r`` (ohm),
    C1 = 4 Q^2 C2 (F)."""
    # source: J. Karki, TI SLOA024, with R1 = R2 = R and K = 1 (from memory):
    # Q = sqrt(C1/C2)/2, w0 = 1/(R sqrt(C1 C2))
    c2 = 1 / (2 * math.pi * f0 * r * 2 * q)
    return {"R1": r, "R2": r, "C1": 4 * q * q * c2, "C2": c2}


def parts_design(parts, stages, mask=(), analysis=None, grades=()):
    """A design from ``parts`` [(ref, value, grade)], ``stages`` and ``mask`` (file forms);
    ``analysis`` defaults to 10 Hz to 1 MHz, 200 points."""
    data = {"format": "tolspread-design", "version": 1,
            "parts": [{"ref": r, "value": v, "grade": g} for r, v, g in parts],
            "stages": stages, "mask": list(mask), "grades": list(grades),
            "analysis": analysis or {"f_start": 10, "f_stop": 1e6, "points": 200}}
    return design_from_dict(data)


def make(stages, analysis=None):
    """A design of EXACT parts from [(topology, options, {role: value or array})].

    Returns (design, circuit, values) where ``values`` (S, P) holds the arrays given (the
    design itself carries the first sample as its nominal values).
    """
    parts, st, cols = [], [], []
    for k, (topo, options, vals) in enumerate(stages, 1):
        roles = {}
        for role, v in vals.items():
            arr = np.atleast_1d(np.asarray(v, dtype=float))
            ref = f"{role}_{k}"
            parts.append({"ref": ref, "value": float(arr[0]), "grade": "EXACT"})
            roles[role] = ref
            cols.append(arr)
        st.append({"topology": topo, "options": options, "parts": roles})
    data = {"format": "tolspread-design", "version": 2, "parts": parts, "stages": st}
    if analysis:
        data["analysis"] = analysis
    design = design_from_dict(data)
    n = max(c.size for c in cols)
    values = np.column_stack([np.broadcast_to(c, (n,)) for c in cols])
    return design, compile_design(design), values


# --- a first-order RC low-pass whose mask passes a band of capacitances -------------------
RC_R0, RC_F2, RC_F3 = 10e3, 1e3, 3e3


def rc_gain_db(c: float, f: float, r: float = RC_R0) -> float:
    """Gain (dB) of a first-order RC low-pass: |H|^2 = 1 / (1 + (2 pi f R C)^2) (circuit theory)."""
    return -10 * math.log10(1 + (2 * math.pi * f * r * c) ** 2)


def rc_capacitor_band(c_grade: dict, c_lo: float, c_hi: float, *, samples: int, seed: int,
                      name: str = "RC band (test)") -> dict:
    """Design dict: R1 = 10k exact, C1 = 10n of ``c_grade``; a floor at RC_F2 passes C <= c_hi
    and a ceiling at RC_F3 passes C >= c_lo (the gain falls as C grows)."""
    return {
        "format": "tolspread-design", "version": 2, "name": name,
        "grades": [c_grade],
        "parts": [{"ref": "R1", "value": "10k", "grade": "EXACT"},
                  {"ref": "C1", "value": "10n", "grade": c_grade["name"]}],
        "stages": [{"topology": "rc_lowpass", "parts": {"R1": "R1", "C1": "C1"}}],
        "analysis": {"samples": samples, "seed": seed, "f_start": 10, "f_stop": 100e3, "points": 60},
        "mask": [{"kind": "floor", "f1": RC_F2 / 2, "f2": RC_F2, "limit1": rc_gain_db(c_hi, RC_F2),
                  "relative": False, "name": "passband floor"},
                 {"kind": "ceiling", "f1": RC_F3, "f2": 2 * RC_F3, "limit1": rc_gain_db(c_lo, RC_F3),
                  "relative": False, "name": "transition ceiling"}],
    }
