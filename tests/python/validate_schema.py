"""Validates YAML files against lawsmith's JSON Schema with the general-purpose `jsonschema`
library (PyPI), reading YAML with PyYAML.

usage: validate_schema.py SCHEMA FILE...
prints one line per file: `valid PATH` or `invalid PATH: MESSAGE`.
"""
import json
import sys

import jsonschema
import yaml


def main():
    schema = json.load(open(sys.argv[1]))
    jsonschema.Draft202012Validator.check_schema(schema)
    validator = jsonschema.Draft202012Validator(schema)
    for path in sys.argv[2:]:
        try:
            doc = yaml.safe_load(open(path, encoding="utf-8"))
        except Exception as e:  # a file YAML itself rejects is not valid either
            print(f"invalid {path}: YAML: {str(e).splitlines()[0]}")
            continue
        errors = sorted(validator.iter_errors(doc), key=lambda e: list(e.path))
        if errors:
            print(f"invalid {path}: {errors[0].message[:200]}")
        else:
            print(f"valid {path}")


if __name__ == "__main__":
    main()
