"""Recordings: append-only files of every frame, read back, exported and replayed.

Knows numpy and files only; the rig and the scenario runner append to it.
"""
