"""Stage 6 of the pipeline: the work behind each command, callable from Python."""

from .check import CheckRun, check_variant, format_text, observation_tables, report_schema, run_check

__all__ = ["CheckRun", "check_variant", "format_text", "observation_tables", "report_schema", "run_check"]
