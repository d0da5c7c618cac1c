"""Susceptibility builders, one module per model.

Every builder has the signature of :data:`kinroots.physics.models.base.Builder`; see
``base.py`` and DEVELOPERS.md ("Adding a species model").
"""
