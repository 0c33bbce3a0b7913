"""subtypes layer (see DESIGN.md): how many subtypes, with resampling consensus, criteria,
recommendation, baselines, partition comparison and parallel backends."""

from strataweave.subtypes.compare import PartitionComparison, compare_partitions, split_flow
from strataweave.subtypes.consensus import ConsensusSummary, consensus_matrix, summarise_consensus
from strataweave.subtypes.criteria import cophenetic_correlation, resample_stability
from strataweave.subtypes.parallel import ParallelSettings, TaskRunner, run_tasks
from strataweave.subtypes.recommend import RULE, Recommendation, recommend_count
from strataweave.subtypes.result import SweepResult
from strataweave.subtypes.settings import SweepSettings
from strataweave.subtypes.sweep import planned_tasks, sweep_subtype_counts

__all__ = [
    "RULE",
    "ConsensusSummary",
    "ParallelSettings",
    "PartitionComparison",
    "Recommendation",
    "SweepResult",
    "SweepSettings",
    "TaskRunner",
    "compare_partitions",
    "consensus_matrix",
    "cophenetic_correlation",
    "planned_tasks",
    "recommend_count",
    "resample_stability",
    "run_tasks",
    "split_flow",
    "summarise_consensus",
    "sweep_subtype_counts",
]
