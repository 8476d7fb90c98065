import asyncio, sys
from emulator.scenario import load_scenario, run_scenario
sc = load_scenario(sys.argv[1])
def tune(tcu):
    orig = tcu.step
    def step(y, flags, T, out):
        orig(y, flags, T, out)
        if round(tcu.t*1000) % 500 == 0 and 3 < tcu.t < 7: print(f"{tcu.t:.2f} ach={tcu.achieved_n:.0f} eff={tcu.effort_n:.0f} rms={tcu.line_rms_f:.0f} live={tcu.line_live_s:.2f}")
    tcu.step = step
r = asyncio.run(run_scenario(sc, tune=tune))
