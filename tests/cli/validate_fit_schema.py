#!/usr/bin/python3
"""Validate `rimwatch fit --json` output against schemas/fit.schema.json with a full JSON Schema
(draft 2020-12) validator, the Python `jsonschema` package (Debian: python3-jsonschema).

Also checks that the validator rejects documents broken on purpose, so a schema that accepts
anything cannot pass. Usage: validate_fit_schema.py RIMWATCH_BIN SOURCE_DIR TMP_DIR
"""

import copy
import json
import os
import subprocess
import sys

try:
    import jsonschema
except ImportError:
    sys.exit("python3-jsonschema is not installed: apt-get install python3-jsonschema")

RUNS = [
    ["--lags", "2", "--granger", "beta:alpha", "--exclude-lag", "2", "--criteria", "4"],
    ["--lags", "1", "--deterministic", "trend", "--covariance", "HAC", "--granger",
     "alpha,gamma:beta"],
    ["--lags", "3", "--deterministic", "none", "--covariance", "classical", "--criteria", "2"],
]


def fit(binary, csv, args):
    done = subprocess.run([binary, "fit", "--csv", csv, "--json", *args], capture_output=True,
                          text=True, check=False)
    if done.returncode != 0:
        sys.exit(f"rimwatch fit {' '.join(args)} exited {done.returncode}: {done.stderr}")
    return json.loads(done.stdout)


def broken_variants(doc):
    """Documents the schema must reject."""
    out = []
    d = copy.deepcopy(doc); del d["sample"]; out.append(("missing sample", d))
    d = copy.deepcopy(doc); d["sample"]["rows"] = "598"; out.append(("rows as text", d))
    d = copy.deepcopy(doc); d["surprise"] = 1; out.append(("unknown top-level key", d))
    d = copy.deepcopy(doc); d["coefficients"][0]["variable"] = "alpha"
    out.append(("const with a variable", d))
    d = copy.deepcopy(doc); d["spectral_radius"]["std_error"] = None
    out.append(("null SE without a reason", d))
    d = copy.deepcopy(doc); d["covariance"]["kind"] = "HC9"; out.append(("unknown kind", d))
    d = copy.deepcopy(doc); d["tests"][0]["p_value"] = 1.5; out.append(("p-value above 1", d))
    d = copy.deepcopy(doc); d["criteria"]["x"] = d["criteria"]["0"]; out.append(("criteria key", d))
    return out


def main():
    binary, source, _tmp = sys.argv[1:4]
    with open(os.path.join(source, "schemas", "fit.schema.json"), encoding="utf-8") as f:
        schema = json.load(f)
    validator_class = jsonschema.Draft202012Validator
    validator_class.check_schema(schema)
    validator = validator_class(schema)
    csv = os.path.join(source, "clients", "examples", "desk_minutes.csv")
    docs = [fit(binary, csv, args) for args in RUNS]
    for args, doc in zip(RUNS, docs):
        errors = [e.message for e in validator.iter_errors(doc)]
        if errors:
            sys.exit(f"fit {' '.join(args)}: schema violations: {errors}")
    for label, bad in broken_variants(docs[0]):
        if validator.is_valid(bad):
            sys.exit(f"the schema accepted a broken document ({label})")
    print(f"{len(docs)} documents valid; {len(broken_variants(docs[0]))} broken ones rejected")


if __name__ == "__main__":
    main()
