"""Multi-cell failure clusters: exact failing clusters, least-stable clusters, FS bound."""

from .forces import (
    ClusterForces,
    cluster_factor_of_safety,
    cluster_forces,
    earth_pressure_coefficients,
    face_pressures,
    nonsubmodular_faces,
)
from .band import BandResult, least_stable_in_band
from .inputs import ClusterOptions, ClusterStrength, ClusterUncertainty
from .probability import ClusterProbability, cluster_failure_probability, cluster_parameter_draws
from .search import WindowResult, failing_set, fs_bound_map, least_stable_in_window
from .sizes import (
    SIZE_COLUMNS,
    SizeResolved,
    area_bands,
    candidate_windows,
    size_resolved_clusters,
)
from .stage import TABLE_COLUMNS, ClusterResult, cluster_table, failure_clusters

__all__ = [
    "BandResult",
    "ClusterForces",
    "ClusterOptions",
    "ClusterProbability",
    "ClusterResult",
    "ClusterStrength",
    "ClusterUncertainty",
    "SIZE_COLUMNS",
    "SizeResolved",
    "TABLE_COLUMNS",
    "WindowResult",
    "area_bands",
    "candidate_windows",
    "cluster_factor_of_safety",
    "cluster_failure_probability",
    "cluster_forces",
    "cluster_parameter_draws",
    "cluster_table",
    "earth_pressure_coefficients",
    "face_pressures",
    "failing_set",
    "failure_clusters",
    "fs_bound_map",
    "least_stable_in_band",
    "least_stable_in_window",
    "nonsubmodular_faces",
    "size_resolved_clusters",
]
