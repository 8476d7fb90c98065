import asyncio, sys
from emulator.scenario import load_scenario, run_scenario
sc = load_scenario(sys.argv[1])
def tune(tcu):
    orig = tcu.step
    def step(y, flags, T, out):
        orig(y, flags, T, out)
        if round(tcu.t*1000) % 250 == 0 and tcu.t > 13.5: print(f"{tcu.t:.2f} amp={tcu.pll.amplitude:.0f} live={tcu.line_live_s:.2f} st={tcu.sequence.state} w={tcu.pll.w:.1f}")
    tcu.step = step
r = asyncio.run(run_scenario(sc, tune=tune))
