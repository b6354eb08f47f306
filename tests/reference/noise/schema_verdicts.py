#!/usr/bin/env python3
"""Writes schema-verdicts.json: what an independent JSON Schema validator says of every record.

The validator is python-jsonschema (Draft 2020-12), an implementation separate from the Rust
`jsonschema` crate that quassay's tests use; tests/noise_record.rs checks that the two agree
on every file here. Run from this folder:  python3 schema_verdicts.py
Verdicts: "valid", "invalid", or "not-json" when the file is not UTF-8 JSON whose numbers all
fit a 64-bit float (Python would read 1e400 as infinity; quassay and serde_json refuse it).
"""
import importlib.metadata
import json
import math
import pathlib

import jsonschema

HERE = pathlib.Path(__file__).resolve().parent
SCHEMA = HERE.parents[2] / "schemas" / "noise-record.schema.json"


def finite_float(text):
    x = float(text)
    if not math.isfinite(x):
        raise ValueError(f"number {text} does not fit a 64-bit float")
    return x


def main():
    schema = json.loads(SCHEMA.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)
    validator = jsonschema.Draft202012Validator(schema)
    verdicts = {}
    for folder in ["valid", "invalid", "invalid-parser-only"]:
        for path in sorted((HERE / folder).glob("*.json")):
            try:
                value = json.loads(path.read_bytes().decode("utf-8"), parse_float=finite_float)
            except (UnicodeDecodeError, ValueError):
                verdicts[f"{folder}/{path.name}"] = "not-json"
                continue
            ok = validator.is_valid(value)
            verdicts[f"{folder}/{path.name}"] = "valid" if ok else "invalid"
    out = {
        "generator": "python-jsonschema "
        + importlib.metadata.version("jsonschema")
        + ", Draft202012Validator",
        "verdicts": verdicts,
    }
    (HERE / "schema-verdicts.json").write_text(json.dumps(out, indent=2) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
