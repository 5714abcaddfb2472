# Tests of tripcount/report/schema.py and schema.json: the schema is valid
# draft 2020-12 (checked by the jsonschema library's metaschema), `tripcount
# schema` prints it, reports of the real pipeline validate, and reports that
# break the known field types do not.

from __future__ import annotations

import copy
import io
import json
from pathlib import Path

import jsonschema
import pytest

from tripcount.cli import main
from tripcount.report.schema import (
    report_errors,
    schema,
    schema_text,
    validate_part,
    validate_report,
)

INPUTS = Path(__file__).parent / "inputs" / "check"


def good_report():
    count = {"value": 10, "pieces": [{"when": "N >= 1", "expr": "N"}], "degree": 1, "leading": "N"}
    return {
        "schema_version": 1, "tool": {"name": "tripcount", "version": "0.1.0"}, "at": {"N": 10},
        "settings": {"assume": None, "caches": {"L1": 32768}},
        "files": [{"path": "a.c", "diagnostics": [
            {"line": 2, "column": 5, "end_line": 2, "end_column": 9, "severity": "note", "code": "TC404",
             "message": "m", "args": {"what": "loop 'i'", "reason": [
                 "used at ", {"line": 3, "column": 9, "end_line": 3, "end_column": 12}, " too"]}},
            {"line": 2, "column": 5, "end_line": 2, "end_column": 9, "severity": "warning", "code": "TC204",
             "message": "m", "args": {"pos": {"line": 2, "column": 5, "end_line": 2, "end_column": 9},
                                      "loop": {"loop": "i", "line": 2, "column": 5, "end_line": 3, "end_column": 9},
                                      "n": 3, "time_bound": False}}],
            "nests": [{
                "function": "f", "line": 2, "column": 5, "end_line": 3, "end_column": 9, "parameters": ["N"],
                "symbolic": {}, "footprint": {"anything": [1, 2]},
                "loops": [{"index": 0, "var": "i", "depth": 0, "parent": None, "line": 2, "column": 5,
                           "end_line": 3, "end_column": 9, "step": 1, "parallel": None, "trips": count,
                           "trips_per_entry": count, "working_set": {"bytes": count}}],
                "statements": [{"id": "S1", "line": 3, "column": 9, "end_line": 3, "end_column": 12,
                                "text": "x++", "loops": [0], "count": {**count, "value": "7/2"}}]}]}],
    }


def test_schema_is_valid_draft_2020_12():
    s = schema()
    assert s["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    jsonschema.Draft202012Validator.check_schema(s)


def test_schema_command_prints_the_package_data():
    out = io.StringIO()
    assert main(["schema"], stdout=out) == 0
    assert out.getvalue() == schema_text()
    assert json.loads(out.getvalue()) == schema()


def test_good_report_and_additional_fields():
    validate_report(good_report())
    validate_part(good_report()["files"][0]["nests"][0], "nest")
    validate_part({"value": None, "pieces": None, "note": "formula not available"}, "count")


@pytest.mark.parametrize("path, value", [
    (("schema_version",), 2),
    (("files", 0, "diagnostics", 0, "code"), "E42"),
    (("files", 0, "diagnostics", 0, "severity"), "fatal"),
    (("files", 0, "diagnostics", 0, "args"), ["what"]),
    (("files", 0, "diagnostics", 1, "args", "pos"), {"line": 2}),
    (("files", 0, "diagnostics", 1, "args", "loop", "column"), 0),
    (("files", 0, "nests", 0, "line"), 0),
    (("files", 0, "nests", 0, "loops", 0, "trips", "value"), 1.5),
    (("files", 0, "nests", 0, "loops", 0, "trips", "pieces"), [{"when": "true"}]),
    (("files", 0, "nests", 0, "loops", 0, "parent"), "0"),
    (("files", 0, "nests", 0, "statements", 0, "id"), "T1"),
    (("files", 0, "nests", 0, "loops", 0, "parallel"), {"collapse": 0}),
    (("at", "N"), "ten"),
])
def test_bad_reports_are_rejected(path, value):
    data = copy.deepcopy(good_report())
    target = data
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = value
    with pytest.raises(jsonschema.ValidationError):
        validate_report(data)
    assert report_errors(data)


def test_missing_required_fields():
    data = good_report()
    del data["files"][0]["nests"][0]["loops"][0]["trips"]
    assert any("trips" in e for e in report_errors(data))
    data = good_report()
    del data["files"][0]["diagnostics"][0]["args"]
    assert any("args" in e for e in report_errors(data))


@pytest.mark.parametrize("args", [[], ["--at", "N=12"], ["--at", "N=12", "--parallel", "4", "--threads", "3"]])
def test_reports_of_the_pipeline_validate(args, private_cache):
    out = io.StringIO()
    status = main(["analyze", "--format", "json", *args, str(INPUTS)], stdout=out, stderr=io.StringIO())
    assert status == 0
    data = json.loads(out.getvalue())
    assert report_errors(data) == []
    assert len(data["files"]) >= 2


def test_snippet_report_validates():
    out = io.StringIO()
    code = "for (int i = 0; i < n; i += 3) for (int j = i; j < n; j++) s += a[i][j];"
    assert main(["analyze", "--format", "json", "--code", code, "--at", "n=9"], stdout=out,
                stderr=io.StringIO()) == 0
    validate_report(json.loads(out.getvalue()))
