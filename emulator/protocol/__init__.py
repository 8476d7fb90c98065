"""The wire protocol as a profile defines it: header, signal map, scales, ranges, modes.

Shared by the rig and by controllers: imports only the plant's parameter types.
"""
