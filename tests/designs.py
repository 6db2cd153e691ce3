"""Design builders shared by the engine tests (not a test module)."""
from __future__ import annotations

import numpy as np

from tolspread.design import design_from_dict
from tolspread.engine import compile_design


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
