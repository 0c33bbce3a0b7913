"""subtypes layer (see DESIGN.md): how many subtypes, with resampling consensus, criteria,
recommendation, baselines, partition comparison and parallel backends."""

from strataweave.subtypes.compare import PartitionComparison, compare_partitions, split_flow
from strataweave.subtypes.consensus import consensus_matrix, consensus_with_subtypes, core_flags
from strataweave.subtypes.criteria import cophenetic_correlation, pac, resample_stability
from strataweave.subtypes.parallel import ParallelSettings, run_tasks
from strataweave.subtypes.recommend import RULE, Recommendation, recommend_count

__all__ = [
    "RULE",
    "ParallelSettings",
    "PartitionComparison",
    "Recommendation",
    "compare_partitions",
    "consensus_matrix",
    "consensus_with_subtypes",
    "cophenetic_correlation",
    "core_flags",
    "pac",
    "recommend_count",
    "resample_stability",
    "run_tasks",
    "split_flow",
]
