"""tolspread numerical library: part values, grades, sampling, circuit responses, yield.

This package never imports Qt; it can be used from scripts and notebooks. The names below
are its public surface (each module also lists its own in ``__all__``); they are imported
on first use, so ``import tolspread`` stays quick::

    import tolspread
    design = tolspread.load_demo()                 # or tolspread.load("my_design.json")
    result = tolspread.analyze(design, samples=2000, seed=1)
    print(result.yield_.estimate)                  # fraction of boards that meet the mask

``evaluate`` and ``recommend`` share their names with their modules, so they are used as
``tolspread.evaluate.evaluate`` and ``tolspread.recommend.recommend``. The applications
(command line and window) live in ``tolspread.app``.
"""
from __future__ import annotations


__version__ = "0.1.0"

#: public name -> (module, attribute)
_PUBLIC: dict[str, tuple[str, str]] = {
    "load": ("designfile", "load"),
    "load_demo": ("designfile", "load_demo"),
    "save": ("designfile", "save"),
    "Design": ("design", "Design"),
    "Part": ("design", "Part"),
    "Stage": ("design", "Stage"),
    "analyze": ("analysis", "analyze"),
    "AnalysisResult": ("analysis", "AnalysisResult"),
    "Ensemble": ("evaluate", "Ensemble"),
    "Recommendation": ("recommend", "Recommendation"),
    "synthesize": ("synthesis", "synthesize"),
    "SynthesisResult": ("synthesis", "SynthesisResult"),
    "YieldEstimate": ("stats", "YieldEstimate"),
    "InputError": ("errors", "InputError"),
    "ValidationError": ("errors", "ValidationError"),
}

__all__ = ["__version__", *_PUBLIC]


from .lazyimport import public_names  # noqa: E402 (after __version__, which the modules read)

__getattr__, __dir__ = public_names(__name__, globals(), _PUBLIC)
