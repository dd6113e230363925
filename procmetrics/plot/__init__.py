"""Figures from results; the only package that imports matplotlib."""
