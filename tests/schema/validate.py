"""Validates design files against `tauweave schema` with the jsonschema package (PyPI).

Usage: validate.py TAUWEAVE_BINARY [--project] GOOD_FILE... -- BAD_FILE...
With --project the files are project files, checked against `tauweave schema --project`.
Every GOOD file must validate; every BAD file must be rejected by the schema. Exit 0 when
both hold, 1 otherwise. The schema is an independent check: this script shares no code with
tauweave and reads YAML with PyYAML.
"""

import json
import subprocess
import sys

import jsonschema
import yaml


class Loader(yaml.SafeLoader):
    """YAML as tauweave reads it: dates stay text."""


Loader.add_constructor(
    "tag:yaml.org,2002:timestamp", lambda loader, node: loader.construct_scalar(node)
)


def main() -> int:
    binary, *files = sys.argv[1:]
    command = [binary, "schema"]
    if files and files[0] == "--project":
        command.append("--project")
        files = files[1:]
    split = files.index("--") if "--" in files else len(files)
    good, bad = files[:split], files[split + 1 :]
    schema = json.loads(subprocess.run(command, check=True, capture_output=True, text=True).stdout)
    jsonschema.Draft202012Validator.check_schema(schema)
    validator = jsonschema.Draft202012Validator(schema)
    failures = 0
    for path in good:
        with open(path, encoding="utf-8") as f:
            doc = yaml.load(f, Loader=Loader)
        errors = sorted(validator.iter_errors(doc), key=lambda e: list(e.path))
        for e in errors:
            print(f"{path}: {'/'.join(map(str, e.path))}: {e.message}")
        failures += bool(errors)
    for path in bad:
        with open(path, encoding="utf-8") as f:
            doc = yaml.load(f, Loader=Loader)
        if validator.is_valid(doc):
            print(f"{path}: the schema accepted a file it should reject")
            failures += 1
    print(f"schema: {len(good)} accepted, {len(bad)} rejected, {failures} failure(s)")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
