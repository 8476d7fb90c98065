import asyncio, sys, time, dataclasses
from emulator.scenario import load_scenario, run_scenario
sc = load_scenario(sys.argv[1]); sc = dataclasses.replace(sc, duration_s=float(sys.argv[2]))
for _ in range(2):
    r = asyncio.run(run_scenario(sc)); print("plant", r.recording.data[-1,0], "wall", r.wall_s, "x", r.recording.data[-1,0]/r.wall_s)
