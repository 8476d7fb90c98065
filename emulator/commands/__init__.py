"""One module per ``railrig`` subcommand: its arguments, and what it runs and prints.

The top layer: may import any room; nothing imports it but ``emulator.cli``.
"""
