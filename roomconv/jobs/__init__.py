"""The job layer: one function per user job, called by every front end (CLI, TUI, demo).

Jobs take plain values with units in their names and 1-based channels, validate them, own
file naming and provenance, write every file through one write guard, report progress
through :class:`~roomconv.jobs.progress.ProgressCallback`, and return small dataclasses.
They never print; the front ends parse, call and present.
"""

from .analyze import AnalyzeResult, analyze_study, export_study
from .measure import MeasureResult, extract_recording, level_check, measure_position, write_sweep
from .naming import harmonic_output, position_output, render_output_name, study_outputs
from .progress import Cancelled, ProgressCallback, silent
from .render import (
    BatchResult,
    LiveSetup,
    QueueResult,
    prepare_live,
    render_many,
    render_one,
    run_batch,
    run_live,
)
from .study import check_study, init_study, report_study, save_session_study, write_study_file
from .synth import EditResult, SynthJobResult, edit_response, materials_table, synthesize_room

__all__ = [
    "AnalyzeResult",
    "analyze_study",
    "export_study",
    "MeasureResult",
    "extract_recording",
    "level_check",
    "measure_position",
    "write_sweep",
    "harmonic_output",
    "position_output",
    "render_output_name",
    "study_outputs",
    "Cancelled",
    "ProgressCallback",
    "silent",
    "BatchResult",
    "LiveSetup",
    "QueueResult",
    "prepare_live",
    "render_many",
    "render_one",
    "run_batch",
    "run_live",
    "EditResult",
    "SynthJobResult",
    "edit_response",
    "materials_table",
    "synthesize_room",
    "check_study",
    "init_study",
    "report_study",
    "save_session_study",
    "write_study_file",
]
