"""Profiles: TOML files read into typed, validated parameters (units converted once).

Imports the parameter dataclasses of the plant and of the rig's sensors; no I/O but files.
"""
