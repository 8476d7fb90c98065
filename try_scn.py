import asyncio, sys, time
from emulator.scenario import load_scenario, run_scenario
sc = load_scenario(sys.argv[1])
def prog(t, T, v, x, ph):
    if int(t*4) % 40 == 0: print(f"t={t:.1f} v={v:.1f} x={x:.0f} {ph}", flush=True)
r = asyncio.run(run_scenario(sc, progress=prog))
for res in r.results:
    print("PASS" if res.passed else "FAIL", res.spec.name, "|", res.measured, res.detail, res.window)
print("wall", r.wall_s, "frames", len(r.recording.data), r.spans, r.link["valid"])
