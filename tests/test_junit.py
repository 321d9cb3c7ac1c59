"""Tests for verification.junit: JUnit-style XML that CI servers can read."""

import math
import re
import xml.etree.ElementTree as ET

import pytest

from lapsolve.errors import InputError
from verification.junit import JUnitCase, junit_xml

# Shape of the JUnit XML report as written by the Apache Ant JUnit task and read by CI
# servers, as described by the commonly circulated junit-10.xsd / JUnit XML reporting
# conventions; there is no single normative schema, so this is common practice, no source.
SUITE_COUNTS = ("tests", "failures", "errors", "skipped")
CASE_CHILDREN = {"properties", "failure", "error", "skipped", "system-out", "system-err"}


def _is_int(text):
    return text is not None and re.fullmatch(r"\d+", text) is not None


def _is_seconds(text):
    return text is not None and math.isfinite(float(text)) and float(text) >= 0


def validate_junit(root):
    """Check the structural shape; return the list of problems (empty when valid)."""
    problems = []
    if root.tag != "testsuites":
        return [f"root is {root.tag}, not testsuites"]
    for key in SUITE_COUNTS:
        if not _is_int(root.get(key)):
            problems.append(f"testsuites.{key} missing or not an integer")
    if not _is_seconds(root.get("time")):
        problems.append("testsuites.time missing or not seconds")
    totals = dict.fromkeys(SUITE_COUNTS, 0)
    for suite in root:
        if suite.tag != "testsuite":
            problems.append(f"unexpected {suite.tag} under testsuites")
            continue
        if not suite.get("name"):
            problems.append("testsuite without name")
        for key in SUITE_COUNTS:
            if not _is_int(suite.get(key)):
                problems.append(f"testsuite.{key} missing or not an integer")
        if not _is_seconds(suite.get("time")):
            problems.append("testsuite.time missing or not seconds")
        cases = suite.findall("testcase")
        counted = {"tests": len(cases), "errors": len(suite.findall("testcase/error")),
                   "failures": len(suite.findall("testcase/failure")),
                   "skipped": len(suite.findall("testcase/skipped"))}
        for key, value in counted.items():
            if suite.get(key) != str(value):
                problems.append(f"testsuite.{key}={suite.get(key)} but {value} found")
            totals[key] += value
        for child in suite:
            if child.tag not in {"testcase", "properties", "system-out", "system-err"}:
                problems.append(f"unexpected {child.tag} under testsuite")
        for case in cases:
            for key in ("classname", "name"):
                if not case.get(key):
                    problems.append(f"testcase without {key}")
            if not _is_seconds(case.get("time")):
                problems.append("testcase.time missing or not seconds")
            for child in case:
                if child.tag not in CASE_CHILDREN:
                    problems.append(f"unexpected {child.tag} under testcase")
            if len(case.findall("failure")) + len(case.findall("skipped")) > 1:
                problems.append("testcase with more than one outcome")
            for failure in case.findall("failure"):
                if failure.get("message") is None:
                    problems.append("failure without message")
            for prop in case.findall("properties/property"):
                if prop.get("name") is None or prop.get("value") is None:
                    problems.append("property without name or value")
    for key, value in totals.items():
        if root.get(key) != str(value):
            problems.append(f"testsuites.{key}={root.get(key)} but {value} found")
    return problems


CASES = [
    JUnitCase("lshape.p1", "H1 order", 0.25,
              failure="H1 error fell at order 0.61 over the last refinement, expected 1.00.",
              properties={"observed": 0.61, "expected": 1.0, "levels": 5}),
    JUnitCase("lshape.p1", "L2 order", 0.5, properties={"observed": 1.333}),
    JUnitCase("slit.p2", "energy order", 0.0, skipped="INCONCLUSIVE: only one level."),
    JUnitCase("square.p1", "patch test", 1.125, system_out="exact to round-off\nsecond line"),
]


def test_structure_and_counts():
    text = junit_xml("verification", CASES, timestamp="2024-05-01T12:00:00")
    root = ET.fromstring(text)
    assert validate_junit(root) == []
    assert (root.get("tests"), root.get("failures"), root.get("skipped")) == ("4", "1", "1")
    assert float(root.get("time")) == pytest.approx(1.875, abs=1e-9)
    suite = root.find("testsuite")
    assert suite.get("name") == "verification"
    assert suite.get("timestamp") == "2024-05-01T12:00:00"
    failure = root.find("testsuite/testcase/failure")
    assert failure.get("message") == CASES[0].failure
    assert failure.text == CASES[0].failure
    props = {p.get("name"): p.get("value") for p in root.iterfind(
        "testsuite/testcase[@name='H1 order']/properties/property")}
    assert props == {"observed": "0.61", "expected": "1.0", "levels": "5"}
    out = root.find("testsuite/testcase[@name='patch test']/system-out")
    assert out.text == "exact to round-off\nsecond line"


def test_validator_rejects_broken_documents():
    # The validator must be able to fail: counts that disagree and a failure without message.
    bad = ET.fromstring('<testsuites tests="2" failures="0" errors="0" skipped="0" time="1">'
                        '<testsuite name="s" tests="2" failures="0" errors="0" skipped="0" '
                        'time="1"><testcase classname="c" name="n" time="1"><failure/>'
                        '</testcase></testsuite></testsuites>')
    problems = validate_junit(bad)
    assert any("failure without message" in p for p in problems)
    assert any("testsuite.tests=2 but 1 found" in p for p in problems)
    assert validate_junit(ET.fromstring("<testsuite/>")) == ["root is testsuite, not testsuites"]


def test_escaping_and_non_ascii_round_trip():
    reason = 'order <0.5> & "λ = ∞" — Ünïcödé ✓ \'quoted\''
    case = JUnitCase('cls<&>"', 'name <&>"', 0.0, failure=reason,
                     properties={'key<&>"': 'value <&>" ∞'}, system_out="out <&> ∞")
    text = junit_xml('suite <&>" ∞', [case])
    root = ET.fromstring(text.encode("utf-8"))
    assert validate_junit(root) == []
    assert root.get("name") == 'suite <&>" ∞'
    element = root.find("testsuite/testcase")
    assert element.get("classname") == 'cls<&>"' and element.get("name") == 'name <&>"'
    assert element.find("failure").get("message") == reason
    assert element.find("failure").text == reason
    prop = element.find("properties/property")
    assert (prop.get("name"), prop.get("value")) == ('key<&>"', 'value <&>" ∞')
    assert element.find("system-out").text == "out <&> ∞"


def test_characters_xml_forbids_are_replaced():
    # Terminal colour codes and NUL are not XML 1.0 characters (W3C XML 1.0, sec. 2.2);
    # without cleaning the document would not parse.
    case = JUnitCase("c", "n", 0.0, failure="red \x1b[31mfail\x1b[0m\x00 end",
                     system_out="a\x07b")
    root = ET.fromstring(junit_xml("s", [case]))
    assert validate_junit(root) == []
    message = root.find("testsuite/testcase/failure").get("message")
    assert message == "red \ufffd[31mfail\ufffd[0m\ufffd end"
    assert root.find("testsuite/testcase/system-out").text == "a\ufffdb"


def test_multiline_reason_message_is_one_line():
    case = JUnitCase("c", "n", 0.0, failure="first line\nsecond   line")
    failure = ET.fromstring(junit_xml("s", [case])).find("testsuite/testcase/failure")
    assert failure.get("message") == "first line second line"
    assert failure.text == "first line\nsecond   line"


def test_empty_suite_is_valid():
    root = ET.fromstring(junit_xml("empty", []))
    assert validate_junit(root) == []
    assert root.get("tests") == "0" and root.get("time") == "0.000"


@pytest.mark.parametrize("case", [
    JUnitCase("c", "n", -1.0),
    JUnitCase("c", "n", math.nan),
    JUnitCase("c", "n", 0.0, failure="f", skipped="s"),
])
def test_bad_cases_raise(case):
    with pytest.raises(InputError):
        junit_xml("s", [case])
