"""One writer per output file; every write goes through :mod:`pipeline.export.atomic`."""
