"""JUnit-style XML for verification verdicts, so CI systems can show them.

The layout is the common one read by CI servers (``testsuites`` >
``testsuite`` > ``testcase`` with ``failure`` / ``skipped`` children and
``properties``); there is no single normative schema, so this follows common
practice. Only :mod:`xml.etree.ElementTree` is used; text is stripped of the
characters XML 1.0 forbids (e.g. terminal colour escapes) before escaping.
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET
from dataclasses import asdict, dataclass, field

from lapsolve.errors import InputError

# Characters outside the XML 1.0 "Char" production (W3C XML 1.0, 5th ed., 2008, sec. 2.2).
_NOT_XML_CHAR = re.compile("[^\t\n\r\x20-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")


@dataclass(frozen=True)
class JUnitCase:
    """One test case: one verdict of one check.

    Attributes
    ----------
    classname : str
        Group of the case, e.g. ``"lshape.p1"``.
    name : str
        Name of the check, e.g. ``"H1 order"``.
    time : float
        Seconds spent, non-negative.
    failure : str or None
        One-sentence reason when the check failed.
    skipped : str or None
        Reason when the check was not run or was inconclusive.
    properties : dict
        Numbers and labels to attach (observed order, expected order, ...).
    system_out : str or None
        Free text captured while running the check.
    """

    classname: str
    name: str
    time: float = 0.0
    failure: str | None = None
    skipped: str | None = None
    properties: dict = field(default_factory=dict)
    system_out: str | None = None

    def to_dict(self) -> dict:
        """Plain dict of the fields."""
        return asdict(self)


def _clean(text) -> str:
    return _NOT_XML_CHAR.sub("\ufffd", str(text))


def _one_line(text) -> str:
    return " ".join(_clean(text).split())


def _seconds(value) -> str:
    return f"{float(value):.3f}"


def _property_value(value) -> str:
    if isinstance(value, float) and math.isfinite(value):
        return repr(value)
    return _clean(value)


def _add_properties(parent: ET.Element, properties: dict) -> None:
    if not properties:
        return
    holder = ET.SubElement(parent, "properties")
    for key, value in properties.items():
        ET.SubElement(holder, "property", name=_one_line(key), value=_property_value(value))


def _check(case: JUnitCase) -> None:
    if not (isinstance(case.time, (int, float)) and math.isfinite(case.time) and case.time >= 0):
        raise InputError(f"time of {case.name!r} must be a non-negative number", field="time")
    if case.failure is not None and case.skipped is not None:
        raise InputError(f"case {case.name!r} cannot be both failed and skipped",
                         field="failure")


def _case_element(suite: ET.Element, case: JUnitCase) -> None:
    element = ET.SubElement(suite, "testcase", classname=_one_line(case.classname),
                            name=_one_line(case.name), time=_seconds(case.time))
    _add_properties(element, case.properties)
    if case.failure is not None:
        failure = ET.SubElement(element, "failure", message=_one_line(case.failure),
                                type="VerificationFailure")
        failure.text = _clean(case.failure)
    if case.skipped is not None:
        ET.SubElement(element, "skipped", message=_one_line(case.skipped))
    if case.system_out is not None:
        ET.SubElement(element, "system-out").text = _clean(case.system_out)


def junit_xml(suite_name: str, cases: list[JUnitCase], *, timestamp: str | None = None,
              properties: dict | None = None) -> str:
    """Render one suite of cases as a JUnit-style XML document.

    Parameters
    ----------
    suite_name : str
        Name of the suite (and of the root ``testsuites``).
    cases : list of JUnitCase
        The cases, in order.
    timestamp : str, optional
        ISO 8601 start time for the suite; left out when ``None`` so output is
        reproducible.
    properties : dict, optional
        Suite-level properties (versions, settings).

    Returns
    -------
    str
        The XML document with an XML declaration, meant to be written as UTF-8.
    """
    cases = list(cases)
    for case in cases:
        _check(case)
    counts = {
        "tests": str(len(cases)),
        "failures": str(sum(case.failure is not None for case in cases)),
        "errors": "0",
        "skipped": str(sum(case.skipped is not None for case in cases)),
        "time": _seconds(sum(float(case.time) for case in cases)),
    }
    root = ET.Element("testsuites", name=_one_line(suite_name), **counts)
    suite = ET.SubElement(root, "testsuite", name=_one_line(suite_name), **counts)
    if timestamp is not None:
        suite.set("timestamp", _one_line(timestamp))
    _add_properties(suite, properties or {})
    for case in cases:
        _case_element(suite, case)
    ET.indent(root)
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode") + "\n"
