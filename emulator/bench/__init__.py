"""Benchmarks that print figures (plant cost, pacing and link, monitor load); no asserts.

On top of everything: they build plants and rigs; only commands import them.
"""
