"""Reads a JUnit XML report with junitparser (PyPI), a parser CI tools use, and prints what
it found as JSON: per suite its counts and each test case's outcome. Shares no code with
tauweave.

Usage: junit_read.py REPORT.xml
"""

import json
import sys

from junitparser import Error, Failure, JUnitXml, Skipped


def main() -> int:
    xml = JUnitXml.fromfile(sys.argv[1])
    suites = []
    for suite in xml:
        cases = []
        for case in suite:
            outcome = "passed"
            message = None
            for result in case.result:
                if isinstance(result, Failure):
                    outcome, message = "failure", result.message
                elif isinstance(result, Error):
                    outcome, message = "error", result.message
                elif isinstance(result, Skipped):
                    outcome, message = "skipped", result.message
            cases.append({"classname": case.classname, "name": case.name, "outcome": outcome, "message": message})
        suites.append(
            {
                "name": suite.name,
                "tests": suite.tests,
                "failures": suite.failures,
                "errors": suite.errors,
                "skipped": suite.skipped,
                "cases": cases,
            }
        )
    print(json.dumps({"tests": xml.tests, "failures": xml.failures, "errors": xml.errors, "suites": suites}))
    return 0


if __name__ == "__main__":
    sys.exit(main())
