"""Rendering results: text tables, JSON/CSV/markdown, the HTML report."""
