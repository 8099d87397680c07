#!/usr/bin/python3
"""Check the wire codec against schemas/wire/*.schema.json with a full JSON Schema (draft 2020-12)
validator, the Python `jsonschema` package (Debian: python3-jsonschema); format checking is off.

Reads the hand-written corpus tests/daemon/wire_corpus.jsonl and what wire_test wrote into
DUMP_DIR (CTest fixture wire_dump):
  corpus_outcomes.jsonl  the decoder's verdict on every corpus message
  mutants.jsonl          the decoder's verdict on mutants of the valid corpus messages
  documents.jsonl        replies and events encoded by the C++ code, each with its schema name
  codes.json             ErrorCodeName of every code
Checks: every message the decoder accepts passes request.schema.json; every message it refuses
fails it, except corpus lines marked "schema": "accept" (a rule JSON Schema cannot express, with
the reason in "why"), which must then pass it, so the mark stays honest; every encoded document
passes its schema; documents broken on purpose fail, so a schema that accepts anything cannot pass.

Usage: validate_wire_schema.py SOURCE_DIR DUMP_DIR
       validate_wire_schema.py --documents SOURCE_DIR DUMP_DIR   (documents.jsonl only)
"""

import copy
import functools
import glob
import json
import os
import sys
import urllib.parse

try:
    import jsonschema
except ImportError:
    sys.exit("python3-jsonschema is not installed: apt-get install python3-jsonschema")

FAILURES = []


def fail(text):
    FAILURES.append(text)


def strict_loads(text):
    """json.loads without the NaN / Infinity extensions (they are not JSON); None if not JSON."""

    def refuse(name):
        raise ValueError(f"{name} is not JSON")

    try:
        return True, json.loads(text, parse_constant=refuse)
    except ValueError:
        return False, None


def join_reference(base, ref):
    """RFC 3986 resolution of the references these schemas use. urllib's urljoin leaves a
    fragment-only reference unresolved under a urn: base (urn is not in its list of schemes that
    allow relative references), which would send the fit schema's "#/$defs/..." to the wrong
    document."""
    if ref.startswith("#"):
        return base.split("#", 1)[0] + ref
    if ":" in ref.split("/", 1)[0] or not base:
        return ref
    return urllib.parse.urljoin(base, ref)


def load_validators(source):
    schemas = {}
    for path in sorted(glob.glob(os.path.join(source, "schemas", "wire", "*.schema.json"))):
        with open(path, encoding="utf-8") as f:
            schema = json.load(f)
        jsonschema.Draft202012Validator.check_schema(schema)
        name = os.path.basename(path)[: -len(".schema.json")]
        schemas[name] = schema
    with open(os.path.join(source, "schemas", "fit.schema.json"), encoding="utf-8") as f:
        fit = json.load(f)
    store = {s["$id"]: s for s in list(schemas.values()) + [fit]}
    validators = {}
    for name, schema in schemas.items():
        resolver = jsonschema.RefResolver(base_uri=schema["$id"], referrer=schema, store=store,
                                          urljoin_cache=functools.lru_cache(1024)(join_reference))
        validators[name] = jsonschema.Draft202012Validator(schema, resolver=resolver)
    return schemas, validators


def request_valid(validator, text):
    ok, doc = strict_loads(text)
    return ok and validator.is_valid(doc)


def first_error(validator, text):
    ok, doc = strict_loads(text)
    if not ok:
        return "not JSON"
    errors = sorted(validator.iter_errors(doc), key=lambda e: list(e.absolute_path))
    return errors[0].message if errors else "valid"


def read_jsonl(path):
    if not os.path.exists(path):
        sys.exit(f"{path} is missing: run wire_test first (CTest fixture wire_dump)")
    with open(path, encoding="utf-8") as f:
        return [json.loads(line) for line in f if line.strip()]


def message_of(line):
    return line["raw"] if "raw" in line else json.dumps(line["json"], separators=(",", ":"))


def check_corpus(source, request):
    corpus = read_jsonl(os.path.join(source, "tests", "daemon", "wire_corpus.jsonl"))
    expressible = 0
    for line in corpus:
        text = message_of(line)
        valid = request_valid(request, text)
        mark = line.get("schema", "accept" if line["expect"] == "ok" else "reject")
        if mark == "accept" and line["expect"] != "ok" and not line.get("why"):
            fail(f"corpus '{line['case']}': marked schema accept without a why")
        if mark == "accept" and not valid:
            fail(f"corpus '{line['case']}': the schema refuses it ({first_error(request, text)})")
        if mark == "reject":
            expressible += 1
            if valid:
                fail(f"corpus '{line['case']}': the schema accepts a message the decoder refuses "
                     f"({line['expect']})")
    return corpus, expressible


def check_outcomes(dump, corpus, request):
    outcomes = read_jsonl(os.path.join(dump, "corpus_outcomes.jsonl"))
    by_case = {line["case"]: line for line in corpus}
    if len(outcomes) != len(corpus):
        fail(f"corpus_outcomes.jsonl has {len(outcomes)} lines, the corpus {len(corpus)}")
    for out in outcomes:
        line = by_case.get(out["case"])
        if line is None:
            fail(f"outcome for an unknown case {out['case']}")
            continue
        if out["decoder"] != line["expect"]:
            fail(f"'{out['case']}': decoder said {out['decoder']}, corpus expects {line['expect']}")
        valid = request_valid(request, out["msg"])
        if out["decoder"] == "ok" and not valid:
            fail(f"'{out['case']}': decoder accepts, schema refuses "
                 f"({first_error(request, out['msg'])})")
        if out["decoder"] != "ok" and line.get("schema") != "accept" and valid:
            fail(f"'{out['case']}': decoder refuses ({out['message']}), schema accepts")
    return len(outcomes)


def check_mutants(dump, request):
    mutants = read_jsonl(os.path.join(dump, "mutants.jsonl"))
    accepted = 0
    for m in mutants:
        valid = request_valid(request, m["msg"])
        accepted += m["decoder"] == "ok"
        if (m["decoder"] == "ok") != valid:
            fail(f"mutant {m['msg']}: decoder {m['decoder']}, schema "
                 f"{'accepts' if valid else 'refuses: ' + first_error(request, m['msg'])}")
    return len(mutants), accepted


def check_documents(dump, validators):
    docs = read_jsonl(os.path.join(dump, "documents.jsonl"))
    counts = {}
    for d in docs:
        name, doc = d["schema"], d["doc"]
        counts[name] = counts.get(name, 0) + 1
        names = [name] + (["reply"] if name.startswith("reply.") else [])
        for n in names:
            errors = [f"{list(e.absolute_path)}: {e.message}" for e in validators[n].iter_errors(doc)]
            if errors:
                fail(f"{name} document against {n}: {errors[:3]} in {json.dumps(doc)[:300]}")
    for name in ["reply", "reply.state", "reply.health", "event.alert", "event.est",
                 "event.reject"]:
        if counts.get(name, 0) == 0:
            fail(f"documents.jsonl holds no {name} document")
    return docs, counts


def first_doc(docs, name, test=lambda d: True):
    for d in docs:
        if d["schema"] == name and test(d["doc"]):
            return d["doc"]
    fail(f"no {name} document to break")
    return None


def broken_variants(docs):
    """(schema, label, document) triples the schemas must refuse."""
    out = []
    state = first_doc(docs, "reply.state", lambda d: d["fit"] is not None)
    early = first_doc(docs, "reply.state", lambda d: d["fit"] is None)
    health = first_doc(docs, "reply.health")
    alert = first_doc(docs, "event.alert")
    est = first_doc(docs, "event.est", lambda d: d["restrictions"])
    if None in (state, early, health, alert, est):
        return out

    def variant(schema, label, doc, change):
        d = copy.deepcopy(doc)
        change(d)
        out.append((schema, label, d))

    variant("reply.state", "no stability", state, lambda d: d.pop("stability"))
    variant("reply.state", "fit without its sample", state, lambda d: d["fit"].pop("sample"))
    variant("reply.state", "fit_unavailable next to a fit", state,
            lambda d: d.update(fit_unavailable="x"))
    variant("reply.state", "null fit without a reason", early, lambda d: d.pop("fit_unavailable"))
    variant("reply.state", "level unknown", state, lambda d: d["stability"].update(level="high"))
    variant("reply.state", "alert without a monitor", state,
            lambda d: d.update(active_alerts=[{k: v for k, v in alert.items() if k != "monitor"}]))
    variant("reply.health", "a code missing from rejects", health, lambda d: d["rejects"].pop("internal"))
    variant("reply.health", "an unknown code in rejects", health, lambda d: d["rejects"].update(bogus=1))
    variant("reply.health", "negative pending acks", health, lambda d: d.update(pending_acks=-1))
    variant("reply.health", "model without stale", health, lambda d: d["models"][0].pop("stale"))
    variant("reply.health", "ok false", health, lambda d: d.update(ok=False))
    variant("event.alert", "level none", alert, lambda d: d.update(level="none"))
    variant("event.alert", "row 0", alert, lambda d: d.update(row=0))
    variant("event.alert", "extra key", alert, lambda d: d.update(extra=1))
    variant("event.est", "no monitors", est, lambda d: d.pop("monitors"))
    variant("event.est", "p-value above 1", est,
            lambda d: next(r for r in d["restrictions"].values() if "p_value" in r).update(p_value=2))
    variant("event.est", "armed as text", est,
            lambda d: next(iter(d["monitors"].values())).update(armed="yes"))
    variant("reply", "failure with an unknown code", {"seq": 1, "ok": False, "code": "oops",
                                                       "message": "x"}, lambda d: None)
    variant("reply", "failure without a message", {"seq": 1, "ok": False, "code": "internal"},
            lambda d: None)
    variant("reply", "seq as text", {"seq": "1", "ok": True}, lambda d: None)
    variant("event.reject", "count 0", {"code": "bad_json", "message": "x", "count": 0},
            lambda d: None)
    return out


def main_documents():
    """--documents SOURCE_DIR DUMP_DIR: only the documents.jsonl check, for replies and events
    captured from a running rimwatchd (tests/daemon/rimwatchd_test.cc)."""
    source, dump = sys.argv[2:4]
    _, validators = load_validators(source)
    _, counts = check_documents(dump, validators)
    if FAILURES:
        print("\n".join(FAILURES))
        sys.exit(f"{len(FAILURES)} disagreements")
    print(f"rimwatchd documents: {dict(sorted(counts.items()))} valid")


def main():
    if sys.argv[1] == "--documents":
        return main_documents()
    source, dump = sys.argv[1:3]
    schemas, validators = load_validators(source)
    request = validators["request"]
    corpus, expressible = check_corpus(source, request)
    outcomes = check_outcomes(dump, corpus, request)
    mutants, mutants_accepted = check_mutants(dump, request)
    docs, counts = check_documents(dump, validators)
    with open(os.path.join(dump, "codes.json"), encoding="utf-8") as f:
        codes = sorted(json.load(f))
    if codes != sorted(schemas["reply"]["$defs"]["code"]["enum"]):
        fail(f"ErrorCodeName {codes} differs from reply.schema.json's code enum")
    if codes != sorted(schemas["reply.health"]["properties"]["rejects"]["required"]):
        fail("reply.health.schema.json's rejects do not list every code")
    broken = broken_variants(docs)
    for schema, label, doc in broken:
        if validators[schema].is_valid(doc):
            fail(f"{schema} accepted a broken document ({label})")
    if FAILURES:
        print("\n".join(FAILURES))
        sys.exit(f"{len(FAILURES)} disagreements")
    print(f"corpus: {len(corpus)} messages, {expressible} refusals the schema expresses; "
          f"decoder outcomes: {outcomes}; mutants: {mutants} ({mutants_accepted} accepted) agree; "
          f"documents: {dict(sorted(counts.items()))} valid; {len(broken)} broken ones refused")


if __name__ == "__main__":
    main()
