"""tolspread numerical library: part values, grades, sampling, circuit responses, yield.

This package never imports Qt; it can be used from scripts and notebooks.
"""
__version__ = "0.1.0"
