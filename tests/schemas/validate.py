#!/usr/bin/env python3
"""Validate iqaudit's JSON documents against the shipped JSON Schemas.

The validator is the Python `jsonschema` package (the reference implementation
of the JSON Schema specification in Python; Draft 2020-12 validator), installed
by tests/run-all.sh. iqaudit's own code takes no part in the check.

Usage: validate.py MANIFEST.json
MANIFEST is a list of {"schema": PATH, "doc": PATH, "lines": BOOL, "valid": BOOL}:
`lines` reads DOC as JSON Lines (every line one instance), `valid` is what the
check must find (false for the deliberately broken documents that show the
check can fail). Prints one line per entry and "N passed, M failed"; exits 1
on any failure.
"""
import importlib.metadata
import json
import sys

import jsonschema


def instances(path, lines):
    with open(path, encoding="utf-8") as f:
        if lines:
            return [json.loads(l) for l in f if l.strip()]
        return [json.load(f)]


def main():
    manifest = json.load(open(sys.argv[1], encoding="utf-8"))
    print("validator: jsonschema", importlib.metadata.version("jsonschema"))
    passed = failed = 0
    for e in manifest:
        schema = json.load(open(e["schema"], encoding="utf-8"))
        jsonschema.Draft202012Validator.check_schema(schema)
        validator = jsonschema.Draft202012Validator(schema)
        docs = instances(e["doc"], e.get("lines", False))
        errors = [err for d in docs for err in validator.iter_errors(d)]
        ok = (not errors) == e.get("valid", True) and len(docs) > 0
        if ok:
            passed += 1
            print(f"ok   {e['doc']} ({len(docs)} instance(s), {len(errors)} error(s))")
        else:
            failed += 1
            print(f"FAIL {e['doc']} against {e['schema']}: expected valid={e.get('valid', True)}")
            for err in errors[:10]:
                path = "/".join(str(p) for p in err.absolute_path)
                print(f"     at /{path}: {err.message[:300]}")
    print(f"{passed} passed, {failed} failed")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
