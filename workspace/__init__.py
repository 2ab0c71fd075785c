"""cutbook: a versioned workspace for spectral network partitioning.

Public scripting interface: :func:`workspace.spectral.partition` (numerics) and the
``cutbook`` command's ``--json`` outputs. Nothing heavy is imported here.
"""

__version__ = "0.1.0"
