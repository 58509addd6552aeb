"""brayscope.daemon: everything that touches the world (feeds, assembly, storage, metrics,
alarms, API, CLI).  Computation lives in :mod:`models`."""

__version__ = "0.1.0"
