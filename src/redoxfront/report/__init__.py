"""The campaign report: one self-contained HTML file a battery team reads without the tool.

Takes what the steps wrote under ``results/`` (ranking, picks, model, calibration, rates,
input problems, figures) and gives ``results/report.html``: summary, picks with structure
drawings, safety, assumptions, front figures, the whole candidate table, the models and
the limitations. :mod:`~redoxfront.report.context` gathers a plain dict; the Jinja2
templates under ``report/templates/`` (autoescape on, one per section) lay it out.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

from jinja2 import Environment, PackageLoader, StrictUndefined, select_autoescape

from redoxfront.campaign import Campaign, section_from_mapping
from redoxfront.outputs import write_text


@dataclass(frozen=True)
class ReportSettings:
    """Campaign section ``[report]``: a note shown at the top (e.g. that data are invented)
    and a title (default: the campaign name)."""

    note: str = ""
    title: str = ""


def environment() -> Environment:
    """The template environment: package templates, HTML autoescaping always on."""
    return Environment(
        loader=PackageLoader("redoxfront.report", "templates"),
        autoescape=select_autoescape(enabled_extensions=("html", "css", "js"), default=True),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )


def render_context(context: Mapping[str, Any]) -> str:
    """The report page from a gathered context (see :func:`redoxfront.report.context.gather`)."""
    return environment().get_template("report.html").render(**context)


def render_report(campaign: Campaign) -> str:
    """The report as one HTML string (figures and drawings inline, every string escaped)."""
    from redoxfront.report.context import gather

    rs = section_from_mapping(ReportSettings, campaign.section("report"), "report")
    return render_context(gather(campaign, rs.title, rs.note))


def write_report(campaign: Campaign) -> Path:
    """Write ``results/report.html`` and return its path."""
    out = campaign.results_dir / "report.html"
    out.parent.mkdir(parents=True, exist_ok=True)
    write_text(out, render_report(campaign))
    return out
