"""Report layer: terminal tables, files and figures of run records and studies."""

from gqsim.report.tables import plot_measures, summary_table, write_outputs

__all__ = ["plot_measures", "summary_table", "write_outputs"]
