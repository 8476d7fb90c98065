"""JUnit XML for a scenario run: one test case per check, so a CI server shows them.

The element and attribute names are those JUnit's XML report uses and CI servers read
(testsuites / testsuite / testcase / failure / properties), written with the standard
library's ElementTree.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from pathlib import Path

from .runner import RunResult


def junit_xml(runs: list[RunResult]) -> ET.ElementTree:
    """A testsuites document with one testsuite per scenario run."""
    root = ET.Element("testsuites", name="railrig scenarios")
    total = failed = 0
    for run in runs:
        stem = run.scenario.path.stem
        failures = sum(not r.passed for r in run.results)
        suite = ET.SubElement(root, "testsuite", name=stem, tests=str(len(run.results)),
                              failures=str(failures), errors="0", skipped="0",
                              time=f"{run.wall_s:.3f}")
        props = ET.SubElement(suite, "properties")
        meta = run.recording.meta
        for key in ("seed", "mode", "controller", "railrig"):
            ET.SubElement(props, "property", name=key, value=str(meta.get(key, "")))
        ET.SubElement(props, "property", name="trainset", value=str(run.scenario.trainset))
        for r in run.results:
            case = ET.SubElement(suite, "testcase", classname=f"railrig.{stem}",
                                 name=r.spec.name, time="0")
            if not r.passed:
                fail = ET.SubElement(case, "failure", message=f"measured {r.measured}",
                                     type=r.spec.kind)
                fail.text = (f"{run.scenario.path}:{r.spec.line}: {r.spec.name}\n"
                             f"measured: {r.measured} {r.detail}\n"
                             f"window: {r.window[0]:.3f} .. {r.window[1]:.3f} s")
        total += len(run.results)
        failed += failures
    root.set("tests", str(total))
    root.set("failures", str(failed))
    ET.indent(root)
    return ET.ElementTree(root)


def write_junit(runs: list[RunResult], path: str | Path) -> None:
    """Write the JUnit XML file."""
    junit_xml(runs).write(path, encoding="utf-8", xml_declaration=True)
