"""Rendering: text tables, HTML and PDF reports from result objects (never re-measuring)."""
