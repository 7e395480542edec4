"""Rendering dry audio through impulse responses: the partitioned convolution engine, offline
files, batches on a pool or a cluster, and live sound-card processing.

Every public name of the submodules is re-exported here::

    from roomconv.render import RenderSettings, render_arrays, LiveProcessor
"""

from .batch import (
    ClusterProgress,
    Job,
    Outcome,
    check_finished,
    dask_executor,
    is_finished,
    local_executor,
    plan_jobs,
    run_batch,
    run_job,
    stop_executor,
)
from .levels import (
    LoudnessMeter,
    PeakMeter,
    TruePeakMeter,
    k_weighting_sos,
)
from .mix import (
    describe_balance,
    energy_per_output,
    ir_gain,
    wet_dry_db,
)
from .offline import (
    DEFAULT_TARGET,
    INTEGER_SUBTYPES,
    LOUDNESS_TARGET_MIN,
    LOUDNESS_TOLERANCE_LU,
    NORMALIZE,
    RenderReport,
    RenderSettings,
    dry_routed,
    prepare_ir,
    render_arrays,
    render_file,
    resample_ir,
)
from .partitioned import (
    MAX_OVERLAP_SAVE,
    NonUniformConvolver,
    OverlapSaveConvolver,
    Routing,
    UniformPartitionedConvolver,
    live_block_size,
    offline_convolver,
    overlap_save_size,
    plan_partition,
    routing_for,
)
from .stream import (
    ComputeLog,
    LiveProcessor,
    LiveStats,
    run_live,
)

__all__ = [
    "Routing",
    "routing_for",
    "UniformPartitionedConvolver",
    "OverlapSaveConvolver",
    "NonUniformConvolver",
    "overlap_save_size",
    "offline_convolver",
    "plan_partition",
    "live_block_size",
    "MAX_OVERLAP_SAVE",
    "PeakMeter",
    "TruePeakMeter",
    "LoudnessMeter",
    "k_weighting_sos",
    "energy_per_output",
    "ir_gain",
    "wet_dry_db",
    "describe_balance",
    "NORMALIZE",
    "DEFAULT_TARGET",
    "INTEGER_SUBTYPES",
    "LOUDNESS_TOLERANCE_LU",
    "LOUDNESS_TARGET_MIN",
    "RenderSettings",
    "RenderReport",
    "resample_ir",
    "prepare_ir",
    "dry_routed",
    "render_arrays",
    "render_file",
    "ComputeLog",
    "LiveStats",
    "LiveProcessor",
    "run_live",
    "Job",
    "Outcome",
    "plan_jobs",
    "check_finished",
    "is_finished",
    "run_job",
    "run_batch",
    "stop_executor",
    "local_executor",
    "ClusterProgress",
    "dask_executor",
]
