"""Stage 6 of the pipeline: the work behind each command, callable from Python."""

from .check import CheckRun, format_text, run_check

__all__ = ["CheckRun", "format_text", "run_check"]
