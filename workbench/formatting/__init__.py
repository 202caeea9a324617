"""Formatting shared by every output: numbers rounded to their Monte Carlo SE, shared phrases, JSON-ready values, table specs rendered as text and HTML (no Bokeh, no Panel)."""
