"""One module per analysis block; see :mod:`streamsim.analysis.base` for the shape and
:mod:`streamsim.analysis.registry` for the order."""
