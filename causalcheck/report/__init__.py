"""Rendering results for people and pipelines: JSON, text tables, output folders.

The HTML and Markdown reports and the figures live here too, one module each.
"""
