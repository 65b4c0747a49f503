"""Renderers: results.json, the figures, and the HTML, PDF and Markdown reports."""

#: Fixed seed of the sideways jitter of the figures' dots; recorded in the provenance, which
#: reads it here rather than from :mod:`reporter.render.figures` (loaded only to draw).
FIGURE_JITTER_SEED = 20_240_917
