"""The grading report's JSON and coverage against plain references.

References: the standard library's JSON encoder on `as_data()` of each verdict (the text must
be exactly what it writes, RFC 8259 JSON with the separators ", " and ": ", non-ASCII escaped
as the encoder does by default), and coverage counted class by class over the verdicts.
"""

from __future__ import annotations

import json

from hypothesis import given, settings
from hypothesis import strategies as st

from scanloom.analysis.bit_meaning import BitMeaning
from scanloom.analysis.fault_verdicts import (
    DETECTED, NOT_DETECTED, POSSIBLY_DETECTED, Detection, FaultVerdict, GradingReport,
)
from scanloom.models.board import PinRef
from scanloom.sim.faults import FAULT_CLASSES, OPEN_NET, OPEN_PIN, SHORT, STUCK_AT, TAP_SHORT, Fault

_NAMES = st.text(alphabet=st.sampled_from('AZaz09_(),.:"\\ é\u00b5\u2126{}[]'), min_size=1, max_size=8)


@st.composite
def _faults(draw) -> Fault:  # type: ignore[no-untyped-def]
    kind = draw(st.sampled_from((OPEN_PIN, OPEN_NET, STUCK_AT, SHORT, TAP_SHORT)))
    net = draw(_NAMES)
    return Fault(kind, f"{kind}:{net}", (net,), pin=PinRef("U1", net) if kind == OPEN_PIN else None,
                 tap=draw(st.booleans()))


@st.composite
def _detections(draw) -> Detection:  # type: ignore[no-untyped-def]
    optional = st.none() | _NAMES
    meaning = BitMeaning(draw(st.integers(0, 10**7)), draw(st.none() | st.integers(0, 99)),
                         draw(st.none() | st.integers(0, 10**5)), draw(optional), draw(optional),
                         draw(st.none() | st.integers(0, 2000)), draw(optional), draw(optional),
                         draw(optional), draw(optional))
    return Detection(meaning.record or 0, meaning.scan_bit or 0, meaning.cycle, meaning)


@st.composite
def _reports(draw) -> GradingReport:  # type: ignore[no-untyped-def]
    shared = draw(st.lists(_detections(), min_size=1, max_size=3))  # faults share first bits
    verdicts = []
    for _ in range(draw(st.integers(0, 12))):
        fault = draw(_faults())
        verdict = draw(st.sampled_from((DETECTED, POSSIBLY_DETECTED, NOT_DETECTED)))
        if verdict == NOT_DETECTED:
            verdicts.append(FaultVerdict(fault, verdict, reason=draw(_NAMES)))
        else:
            first = draw(st.sampled_from(shared) | _detections())
            verdicts.append(FaultVerdict(fault, verdict, first))
    return GradingReport(tuple(verdicts), draw(st.integers(0, 5)))


def _reference_json(report: GradingReport) -> str:
    """The report as the encoder writes it item by item (the layout `render_json` promises)."""
    data = report.as_data()
    faults = data.pop("faults")
    rest = json.dumps(data, indent=2)[1:].lstrip("\n")
    if not faults:
        return '{\n  "faults": [],\n' + rest
    encode = json.JSONEncoder(separators=(", ", ": ")).encode
    return '{\n  "faults": [\n' + ",\n".join("    " + encode(item) for item in faults) + "\n  ],\n" + rest


@settings(max_examples=150, deadline=None)
@given(_reports())
def test_the_json_is_what_the_encoder_writes_for_each_verdict(report: GradingReport) -> None:
    rendered = report.render_json()
    assert rendered == _reference_json(report)
    assert json.loads(rendered) == report.as_data()


@settings(max_examples=150, deadline=None)
@given(_reports())
def test_coverage_counts_each_class_as_filtering_the_verdicts_would(report: GradingReport) -> None:
    coverage = report.coverage()
    expected = {}
    for name in FAULT_CLASSES + ("all",):
        chosen = [v for v in report.verdicts if name == "all" or v.fault.fault_class == name]
        if chosen or name == "all":
            expected[name] = (len(chosen), sum(v.verdict == DETECTED for v in chosen),
                              sum(v.verdict == POSSIBLY_DETECTED for v in chosen))
    assert {name: (c.total, c.detected, c.possibly) for name, c in coverage.items()} == expected
    assert list(coverage) == list(expected)  # classes in their fixed order, "all" last


def test_a_shared_first_bit_reads_the_same_in_every_verdict() -> None:
    meaning = BitMeaning(12, 4, 3, "U2", "BOUNDARY", 1, "P(0)", "N\u00e9", "t", "s")
    first = Detection(4, 3, 12, meaning)
    faults = [Fault(STUCK_AT, f"stuck-at-{v}:N\u00e9", ("N\u00e9",), value=v) for v in "01"]
    report = GradingReport(tuple(FaultVerdict(f, DETECTED, first) for f in faults))
    lines = report.render_json().splitlines()[2:4]
    assert lines[0].endswith(', "first": {"cycle": 12, "record": 4, "scan_bit": 3, "device": "U2", '
                             '"register": "BOUNDARY", "bit": 1, "port": "P(0)", "net": "N\\u00e9", '
                             '"test": "t", "step": "s"}},')
    assert lines[0].split('"first"')[1].rstrip(",") == lines[1].split('"first"')[1]
    text = report.render().splitlines()
    assert text[0].endswith("first: test t step s, record 4 bit 3, U2 BOUNDARY cell 1, port P(0), net N\u00e9")
