"""Susceptibility builders, one module per model.

Every builder has the signature of :data:`kinroots.models.base.Builder`; see
``base.py`` and DEVELOPERS.md ("Adding a species model").
"""
