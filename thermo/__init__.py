"""heatpath numerical core: thermodynamics of crystallizing silicate melts.

Pure numpy/scipy; no web framework imports (a test enforces this).
"""

__version__ = "0.1.0"
