"""Reports: the JSON and HTML evidence of each unit, written whatever happened.

``write_reports(record, layout, captures)`` writes ``<time>-<verdict>.json`` first (the record
of truth) and then the self-contained ``.html`` beside it; a reanalysis is written as
``<time>-reanalysis-v<plan version>-<verdict>.*``. Heavy modules (jinja2, numpy plots)
are imported only when a report is written.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from benchgate.analysis.capture import Capture
    from benchgate.record import UnitRecord
    from benchgate.report.layout import ReportLayout

__all__ = ["write_reports"]


def write_reports(record: UnitRecord, layout: ReportLayout,
                  captures: Mapping[str, Capture] | None = None) -> dict[str, Path]:
    """Write the unit's JSON and HTML reports into ``layout.folder``.

    Parameters
    ----------
    record : UnitRecord
        The finished (or aborted) run.
    layout : ReportLayout
        Where the files go; the verdict in the file names is ``record.verdict``.
    captures : mapping of step id to Capture
        The captures already saved by the runner, for the HTML plots.

    Returns
    -------
    dict
        ``{"json": Path, "html": Path}``.
    """
    from benchgate.report.html import write_html
    from benchgate.report.json_report import write_json
    from benchgate.report.layout import report_tag

    layout.ensure()
    verdict = record.verdict.value
    tag = report_tag(record)
    paths = {"json": write_json(record, layout.report_path(verdict, "json", tag=tag))}
    paths["html"] = write_html(record, layout.report_path(verdict, "html", tag=tag), captures or {})
    return paths
