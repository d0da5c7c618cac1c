"""Figures for every table (matplotlib imported inside the functions, Agg backend)."""
