import asyncio, sys
from emulator.scenario import load_scenario, run_scenario
sc = load_scenario(sys.argv[1])
def tune(tcu): tcu.adhesion.enabled = False
for t in (None, tune):
    r = asyncio.run(run_scenario(sc, tune=t))
    print("broken" if t else "ok", r.wall_s)
    for res in r.results:
        print("PASS" if res.passed else "FAIL", res.spec.name, "|", res.measured, res.detail)
