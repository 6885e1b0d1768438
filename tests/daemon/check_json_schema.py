#!/usr/bin/env python3
"""Validates JSON documents against a JSON Schema with python3-jsonschema (Debian), the
outside check for nightjar's alert payloads.

    check_json_schema.py SCHEMA FILE

FILE holds one JSON document per line. Exit 0 when every line is valid, 1 with the first
error (line number and path) otherwise, 2 on usage errors.
"""
import json
import sys

import jsonschema


def main(argv):
    if len(argv) != 3:
        print(__doc__, file=sys.stderr)
        return 2
    with open(argv[1], encoding="utf-8") as f:
        schema = json.load(f)
    validator_class = jsonschema.validators.validator_for(schema)
    validator_class.check_schema(schema)
    validator = validator_class(schema)
    count = 0
    with open(argv[2], encoding="utf-8") as f:
        for number, line in enumerate(f, 1):
            if not line.strip():
                continue
            document = json.loads(line)
            errors = sorted(validator.iter_errors(document), key=lambda e: list(e.path))
            if errors:
                e = errors[0]
                print(f"{argv[2]}:{number}: {'/'.join(map(str, e.path)) or '(root)'}: {e.message}",
                      file=sys.stderr)
                return 1
            count += 1
    print(f"{count} documents valid against {argv[1]} ({validator_class.__name__})")
    return 0 if count > 0 else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv))
