"""Vega-Lite specs from results. One small function per chart kind; no statistics here."""
