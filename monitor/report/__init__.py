"""The post-shot report: a replay of the file summarised (envelope, excursions, alarms, quantities, criteria)."""

from monitor.report.build import Report, build_report
from monitor.report.render import to_json, to_markdown

__all__ = ["Report", "build_report", "to_json", "to_markdown"]
