"""Rendering the facts into HTML, PDF and e-mail: placement only, no arithmetic."""

from __future__ import annotations

from forebrief.report.render.html import FigureView, render_html, template_environment
from forebrief.report.render.pdf import render_pdf

__all__ = ["FigureView", "render_html", "render_pdf", "template_environment"]
