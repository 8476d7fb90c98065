import asyncio, cProfile, pstats, sys
from emulator.scenario import load_scenario, run_scenario
import dataclasses
sc = load_scenario(sys.argv[1])
sc = dataclasses.replace(sc, duration_s=30.0)
asyncio.run(run_scenario(sc))  # warm
cProfile.run("asyncio.run(run_scenario(sc))", "/tmp/scn.prof")
p = pstats.Stats("/tmp/scn.prof"); p.sort_stats("tottime").print_stats(25)
