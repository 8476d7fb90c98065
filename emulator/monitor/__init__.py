"""The monitor: telemetry out and operator commands in, for dashboards and scripts.

Reads a rig's state and applies faults through the faults room; never blocks the frame.
"""
