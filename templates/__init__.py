"""Jinja2 templates and CSS for masterqc's reports (shipped as package data)."""
