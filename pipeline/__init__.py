"""snugboard: does a small add-on board fit the cavity inside an existing enclosure?

The package is a one-way pipeline of stages (see DEVELOPERS.md): read the
project and design, build and check the connectivity graph, read the cavity
drawing, derive the usable region, estimate area, place and fit, write the
outputs. Only :mod:`pipeline.cli` talks to people.
"""

__version__ = "0.1.0"
