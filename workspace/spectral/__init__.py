"""Spectral partitioning: pure numerics (numpy/scipy; networkx for baselines).

Public entry point: :func:`partition`. Parameter schemas: :mod:`.methods`.
Quality measures: :func:`quality_measures`. Planted-partition sampler:
:func:`planted_partition`.
"""

from .engine import partition
from .eigen import laplacian_eigenpairs
from .generators import planted_partition
from .methods import METHODS, MethodInfo, ParamSpec, method_names, validate_params
from .quality import quality_measures
from .result import PartitionResult, canonical_labels

__all__ = ["partition", "PartitionResult", "METHODS", "MethodInfo", "ParamSpec", "method_names",
           "validate_params", "quality_measures", "planted_partition", "laplacian_eigenpairs",
           "canonical_labels"]
