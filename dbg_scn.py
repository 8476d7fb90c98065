import asyncio, sys
import numpy as np
from emulator.scenario import load_scenario, run_scenario
sc = load_scenario(sys.argv[1])
r = asyncio.run(run_scenario(sc))
rec = r.recording
names = sys.argv[2].split(",")
step = int(float(sys.argv[3]) * 1000) if len(sys.argv) > 3 else 1000
from emulator.scenario.checks import signal_columns
cols = []
for n in names:
    c, sc_, off = signal_columns(rec.columns, n); cols.append((n, c, sc_, off))
for k in range(0, len(rec.data), step):
    row = rec.data[k]
    print(f"{row[0]:7.2f} " + " | ".join(f"{n.split('.')[-1][:14]}=" + ",".join(f"{row[i]*s+o:.4g}" for i in c[:4]) for n, c, s, o in cols))
for res in r.results:
    print("PASS" if res.passed else "FAIL", res.spec.name, "|", res.measured, res.detail)
