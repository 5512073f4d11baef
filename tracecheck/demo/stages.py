"""The demo scenario: an electric ferry's shore-charging system at four stages.

The stage exports are built here, deterministically, rather than shipped as files, so
the planted defects are documented beside the code that plants them. Each stage
mostly extends the previous one, as real exports do.

Planted defects (rule id: stage where present):

- ``dangling-link``: preliminary-design (TST-INT-004 verifies the withdrawn REQ-SYS-009);
  fixed at detailed-design.
- ``cycle`` (derives_from, three requirements): detailed-design; fixed at qualification.
- ``duplicate-link``: detailed-design (FN-CHG-002 allocated_to CMP-CHG-001 twice).
- ``relation-endpoints``: preliminary-design onwards (TST-SAF-001 verifies HAZ-002).
- ``duplicate-id``: detailed-design (REQ-SW-007 exported twice); fixed at qualification.
- ``coverage``: every stage has unverified requirements; HAZ-006 is unmitigated at
  qualification; FN-OPS-004 is not allocated at detailed-design.
- Re-identification between detailed-design and qualification: REQ-SW-031 -> REQ-SW-131
  and REQ-SW-032 -> REQ-SW-132 (a renumbering, same content).
- The ``proposed-change`` branch adds REQ-SYS-040 (a new charge-rate requirement that no
  test verifies yet: one new coverage finding) and mitigates HAZ-006 (one resolved).
"""

from __future__ import annotations

import json
from typing import Any

__all__ = ["stage_document", "STAGE_NAMES"]

STAGE_NAMES = ("concept", "preliminary-design", "detailed-design", "qualification", "proposed-change")
_ORDER = {name: n for n, name in enumerate(STAGE_NAMES)}

SYSTEM = [
    ("001", "Charging power", "The shore charger shall deliver a continuous charging power of at least 1.2 MW to the ferry battery at the berth.", "C"),
    ("002", "Charge current limit", "The shore charger shall limit the charging current to the lower of its rated current and the current requested by the battery management system.", "D"),
    ("003", "Plug-in time", "The charging arm shall connect to the vessel inlet within 60 s after the vessel is reported moored.", "B"),
    ("004", "Mooring confirmation", "Charging shall not start until the mooring detection confirms the vessel is within 0.3 m of its berthing position.", "D"),
    ("005", "Emergency stop", "Pressing any emergency stop shall de-energise the charging circuit within 500 ms.", "D"),
    ("006", "Insulation monitoring", "The charger shall monitor the insulation resistance of the unearthed charging circuit continuously while energised.", "C"),
    ("007", "Operator information", "The operator panel shall show the charging state, power and state of charge to the shore operator.", "A"),
    ("008", "Ship-shore link", "The charger and the vessel shall exchange charging requests and status over a supervised communication link.", "C"),
    ("010", "Departure release", "The charging arm shall be retracted and parked before the vessel is released for departure.", "D"),
    ("011", "Environmental range", "The shore equipment shall operate in ambient temperatures from -25 degC to +45 degC.", "QM"),
    ("012", "Availability", "The charging system shall be available for at least 99.5 % of scheduled crossings.", "QM"),
]

HAZARDS = [
    ("001", "Arc flash at the inlet", "Disconnection under load causes an arc at the vessel inlet.", "catastrophic"),
    ("002", "Vessel drift while connected", "The vessel drifts off the berth with the arm engaged and the cable under tension.", "catastrophic"),
    ("003", "Battery overcharge", "Charging current exceeds the battery's acceptance and overheats cells.", "critical"),
    ("004", "Electric shock", "Loss of insulation exposes persons to touch voltage.", "catastrophic"),
    ("005", "Arm collision", "The charging arm strikes the hull or a person during positioning.", "critical"),
    ("006", "Loss of ship-shore link", "Charging continues on stale requests after the link is lost.", "critical"),
]

# Subsystems: (code, component name, function verb phrase, requirement subjects)
SUBSYSTEMS = [
    ("CHG", "power converter", "convert grid power to the requested DC charging current", [
        "limit the output current to the requested value with an accuracy of 2 %",
        "ramp the charging current up at no more than 100 A/s",
        "reduce the current to zero within 100 ms when the request is withdrawn",
        "measure the output voltage with an accuracy of 0.5 %",
        "stop charging when the output voltage exceeds the requested maximum by 2 %",
        "report its available power to the battery management interface every 100 ms",
        "derate its output linearly above an internal temperature of 60 degC",
        "open the DC contactors only when the current is below 5 A",
    ]),
    ("ARM", "charging arm", "position the connector and engage the vessel inlet", [
        "move the connector to the inlet position within 20 mm accuracy",
        "limit the contact force on the inlet to 400 N",
        "stop all axes within 200 ms of an emergency stop",
        "detect an obstacle in its path with a light curtain",
        "retract to its parked position on loss of power",
        "compensate vessel heave of up to 0.5 m while engaged",
        "confirm engagement of the connector latch before energising",
        "release the connector when the cable tension exceeds 2 kN",
    ]),
    ("MOOR", "mooring detection unit", "determine the vessel position at the berth", [
        "measure the vessel position with two independent distance sensors",
        "report the vessel as moored only when both sensors agree within 50 mm",
        "monitor the mooring-line tension on every line",
        "raise a drift warning when the position changes by more than 0.2 m",
        "update the mooring state at least every 50 ms",
    ]),
    ("BMS", "battery management interface", "exchange charging requests and battery status with the vessel", [
        "forward the vessel's maximum charge current request within 50 ms",
        "reject requests outside the charger's rated range",
        "report the state of charge to the operator panel",
        "stop charging when a cell temperature above 55 degC is reported",
        "treat a request older than 500 ms as withdrawn",
    ]),
    ("INS", "insulation monitor", "supervise the insulation of the unearthed charging circuit", [
        "measure the insulation resistance at least once per second",
        "raise an alarm below 300 kOhm",
        "open the main contactor below 100 kOhm",
        "test its own measurement circuit before each charging session",
    ]),
    ("EST", "emergency stop circuit", "de-energise the charging circuit on demand", [
        "provide emergency stop buttons at the arm, the panel and the gangway",
        "open the main contactor through a hard-wired category 0 stop",
        "require a manual reset after an emergency stop",
        "monitor the stop circuit wiring for open and short circuits",
    ]),
    ("OPS", "operator panel", "present status and accept operator commands", [
        "show the charging power and state of charge once per second",
        "show active alarms in order of priority",
        "log every operator command with a timestamp",
        "require confirmation before a manual arm movement",
    ]),
    ("COM", "ship-shore communication unit", "carry charging messages between vessel and shore", [
        "supervise the link with a heartbeat every 100 ms",
        "declare the link lost after three missed heartbeats",
        "authenticate the vessel before the first charging request",
    ]),
]

_SUB_TO_SYS = {"CHG": "002", "ARM": "003", "MOOR": "004", "BMS": "008", "INS": "006",
               "EST": "005", "OPS": "007", "COM": "008"}
_SUB_TO_HAZ = {"CHG": "003", "ARM": "005", "MOOR": "002", "BMS": "003", "INS": "004",
               "EST": "001", "OPS": None, "COM": None}


class _Thread:
    def __init__(self) -> None:
        self.elements: list[dict[str, Any]] = []
        self.links: list[dict[str, Any]] = []

    def element(self, id_, kind, name, text, parent=None, **attributes) -> str:
        item: dict[str, Any] = {"id": id_, "kind": kind, "name": name, "text": text}
        if parent:
            item["parent"] = parent
        if attributes:
            item["attributes"] = attributes
        self.elements.append(item)
        return id_

    def link(self, source, target, relation) -> None:
        self.links.append({"source": source, "target": target, "relation": relation})


def _status(stage: int) -> str:
    return ("draft", "reviewed", "approved", "approved", "approved")[stage]


def _result(n: int, stage: int) -> str:
    if stage < 3:
        return "not-run" if stage < 2 else ("pass" if n % 4 else "not-run")
    return "fail" if n % 23 == 5 else "blocked" if n % 29 == 7 else "pass"


def _system(t: _Thread, stage: int) -> None:
    t.element("REQ-SYS-000", "requirement", "System requirements", "Section: shore-charging system requirements.",
              level="system", integrity="QM", status=_status(stage))
    for code, name, text, integrity in SYSTEM:
        if code == "012" and stage < 1:
            continue
        t.element(f"REQ-SYS-{code}", "requirement", name, text, "REQ-SYS-000",
                  level="system", integrity=integrity, status=_status(stage))
    for code, name, text, severity in HAZARDS:
        t.element(f"HAZ-{code}", "hazard", name, text, severity=severity)
    mitigations = {"001": "005", "002": "004", "003": "002", "004": "006", "005": "003"}
    for hazard, req in mitigations.items():
        t.link(f"REQ-SYS-{req}", f"HAZ-{hazard}", "mitigates")
    if stage >= 3:  # the system-level allocation is completed for qualification
        for component, req in (("CHG", "001"), ("ARM", "010"), ("OPS", "012"), ("CHG", "011")):
            t.link(f"CMP-{component}-001", f"REQ-SYS-{req}", "satisfies")
    if stage >= 4:  # proposed change: the link-loss hazard gets its mitigation
        t.link("REQ-SYS-008", "HAZ-006", "mitigates")
    if stage >= 4:
        t.element("REQ-SYS-040", "requirement", "Reduced charge rate in heavy swell",
                  "The shore charger shall limit the charging power to 600 kW while the mooring detection reports vessel motion above 0.3 m.",
                  "REQ-SYS-000", level="system", integrity="C", status="draft")
        t.link("REQ-SW-CHG-001", "REQ-SYS-040", "derives_from")


def _subsystem(t: _Thread, stage: int, index: int, code: str, component: str, verb: str, subjects: list[str]) -> None:
    limit = {0: 1, 1: 4, 2: 7, 3: 8, 4: 8}[stage]
    subjects = subjects[:limit]
    if not subjects:
        return
    cmp_id = t.element(f"CMP-{code}-001", "component", component.capitalize(),
                       f"The {component} of the shore-charging system.")
    fn_id = t.element(f"FN-{code}-001", "function", verb.capitalize(), f"The system shall {verb}.")
    t.link(fn_id, cmp_id, "allocated_to")
    t.link(cmp_id, f"REQ-SYS-{_SUB_TO_SYS[code]}", "satisfies")
    section = t.element(f"REQ-SW-{code}-000", "requirement", f"{component.capitalize()} requirements",
                        f"Section: requirements on the {component}.", level="subsystem",
                        integrity="QM", status=_status(stage))
    for n, subject in enumerate(subjects, 1):
        integrity = "D" if code in ("EST", "INS", "MOOR") else "C" if code in ("CHG", "ARM", "BMS") else "B"
        rid = t.element(f"REQ-SW-{code}-{n:03d}", "requirement", subject.split(" ")[0].capitalize() + " " + " ".join(subject.split(" ")[1:4]),
                        f"The {component} shall {subject}.", section, level="subsystem",
                        integrity=integrity, status=_status(stage))
        t.link(rid, f"REQ-SYS-{_SUB_TO_SYS[code]}", "derives_from")
        if stage >= 2:
            sub_fn = t.element(f"FN-{code}-{n + 1:03d}", "function", f"{component.capitalize()} function {n}",
                               f"Realises: the {component} shall {subject}.")
            t.link(sub_fn, rid, "satisfies")
            if not (stage == 2 and code == "OPS" and n == 3):  # FN-OPS-004 unallocated at detailed design
                t.link(sub_fn, cmp_id, "allocated_to")
            t.link(sub_fn, fn_id, "part_of")
        else:
            t.link(cmp_id, rid, "satisfies")
        tested = stage >= 3 or (stage == 2 and n % 2 == 1) or (stage == 1 and n == 1)
        if tested:
            for variant in (1, 2) if integrity in ("C", "D") and stage >= 3 else (1,):
                tid = t.element(f"TST-{code}-{n:03d}-{variant}", "test", f"Test of {rid} ({'nominal' if variant == 1 else 'fault'})",
                                f"{'Demonstrate' if variant == 1 else 'Inject a fault and check'} that the {component} shall {subject}.",
                                method="test", result=_result(index * 10 + n + variant, stage))
                t.link(tid, rid, "verifies")
        hazard = _SUB_TO_HAZ[code]
        if hazard and n == 1:
            t.link(rid, f"HAZ-{hazard}", "mitigates")
    if stage >= 1:
        for n in range(1, {1: 3, 2: 5}.get(stage, 6)):
            iid = t.element(f"IF-{code}-{n:03d}", "interface", f"{component.capitalize()} interface {n}",
                            f"Signal interface {n} of the {component}: data, timing and electrical levels.")
            t.link(iid, f"REQ-SW-{code}-{min(n, len(subjects)):03d}", "satisfies")
            tid = t.element(f"TST-IF-{code}-{n:03d}", "test", f"Interface test {code}-{n}",
                            f"Check interface {n} of the {component} against its specification.",
                            method="inspection", result=_result(n, stage))
            t.link(tid, iid, "verifies")


def _software(t: _Thread, stage: int) -> None:
    # Software requirements of the charge controller; a renumbering happens at qualification.
    if stage < 2:
        return
    count = 50 if stage == 2 else 62
    t.element("REQ-SW-000", "requirement", "Charge controller software", "Section: charge controller software requirements.",
              level="software", integrity="QM", status=_status(stage))
    for n in range(1, count + 1):
        number = n + 100 if stage >= 3 and n in (31, 32) else n
        topic = ("current set-point", "voltage limit", "contactor sequence", "heartbeat", "alarm", "log record")[n % 6]
        rid = f"REQ-SW-{number:03d}"
        text = f"The charge controller software shall handle the {topic} of channel {n} within one 10 ms control cycle."
        if stage >= 3 and n == 12:
            text = f"The charge controller software shall process the {topic} of channel {n} within one 10 ms control cycle and report overruns."
        t.element(rid, "requirement", f"Software {topic} {n}", text, "REQ-SW-000", level="software",
                  integrity="C" if n % 3 else "B", status="reviewed" if stage == 2 or n % 5 == 0 else "approved")
        t.link(rid, "REQ-SYS-002" if n % 2 else "REQ-SYS-008", "derives_from")
        t.link("CMP-CHG-001", rid, "satisfies")
        if stage >= 3 or n % 3:
            for variant in (1, 2) if stage >= 3 and n % 3 else (1,):
                tid = t.element(f"TST-SW-{n:03d}-{variant}", "test", f"Software test {n}.{variant}",
                                f"Exercise the {topic} handling of channel {n} on the target.",
                                method="test", result=_result(n + variant, stage))
                t.link(tid, rid, "verifies")
        if stage >= 3 and n == 40:  # left unverified at qualification
            t.links.pop()
    if stage == 2:  # a derivation loop introduced by a careless edit
        t.link("REQ-SW-001", "REQ-SW-002", "derives_from")
        t.link("REQ-SW-002", "REQ-SW-003", "derives_from")
        t.link("REQ-SW-003", "REQ-SW-001", "derives_from")
        t.elements.append({"id": "REQ-SW-007", "kind": "requirement", "name": "Software contactor sequence 7",
                           "text": "Duplicate export of REQ-SW-007.", "attributes": {"level": "software", "integrity": "C", "status": "draft"}})
        t.link("FN-CHG-002", "CMP-CHG-001", "allocated_to")


def _stage_links(t: _Thread, stage: int) -> None:
    if stage >= 1:
        t.element("TST-SAF-001", "test", "Drift response test", "Simulate vessel drift and check the arm releases.",
                  method="test", result=_result(3, stage))
        t.link("TST-SAF-001", "HAZ-002", "verifies")  # a test aimed at a hazard: wrong relation
        t.link("TST-SAF-001", "REQ-SYS-004", "verifies")
        t.element("TST-INT-004", "test", "Integrated charge session", "Run a full charging session at the berth.",
                  method="demonstration", result=_result(4, stage))
        t.link("TST-INT-004", "REQ-SYS-001", "verifies")
    if stage == 1:
        t.link("TST-INT-004", "REQ-SYS-009", "verifies")  # REQ-SYS-009 was withdrawn


def stage_document(name: str) -> dict[str, Any]:
    """The thread JSON document of a stage (or of the proposed change)."""
    stage = _ORDER[name]
    t = _Thread()
    _system(t, stage)
    for index, (code, component, verb, subjects) in enumerate(SUBSYSTEMS):
        _subsystem(t, stage, index, code, component, verb, subjects)
    _software(t, stage)
    _stage_links(t, stage)
    model = {"name": "ferry shore charging", "stage": name if name != "proposed-change" else "qualification"}
    return {"format": "tracecheck-thread/1", "model": model, "elements": t.elements, "links": t.links}


def stage_bytes(name: str) -> bytes:
    return (json.dumps(stage_document(name), indent=2, ensure_ascii=False) + "\n").encode("utf-8")
