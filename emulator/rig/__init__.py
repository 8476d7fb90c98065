"""The rig: the frame loop and what it composes (clock, sensors, sampling, warm-up).

Where the parts meet: may import plant, link, protocol, faults, recording and profiles;
nothing imports the rig but the scenario runner, campaigns, benches and commands.
"""
