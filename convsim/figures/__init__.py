"""Figures in the house style: fields, series, onset, bench, sweep, animation."""
