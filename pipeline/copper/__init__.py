"""The independent copper checker: reads a ``routes.json`` document, nothing else.

It shares no code with :mod:`pipeline.route` (a test guards the imports).
"""

from .check import TOL, CopperCheck, CopperProblem, check_copper

__all__ = ["check_copper", "CopperCheck", "CopperProblem", "TOL"]
