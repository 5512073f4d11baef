"""ReqIF 1.2 adapter: mapping, the OMG schema, round trips, .reqifz archives."""

from __future__ import annotations

import io
import zipfile
from functools import lru_cache
from pathlib import Path

import pytest
from lxml import etree

from tests.conftest import shared_file
from tracecheck.check import check_model
from tracecheck.config import Config
from tracecheck.demo import STAGES
from tracecheck.demo.stages import stage_bytes
from tracecheck.errors import InputError
from tracecheck.formats import detect, read_model, reqif, reqifz, thread_json

FIXTURE = Path(__file__).resolve().parents[1] / "fixtures" / "reqif" / "charging-arm.reqif"

# Local stand-ins for the two imports of reqif.xsd (see ../shared/data/README.md):
# xml.xsd gives the xml:lang attribute; driver.xsd gives the one XHTML group reqif.xsd
# uses, here accepting any element of the XHTML namespace. XHTML content is therefore
# NOT checked by these tests, only everything in the ReqIF namespace.
_XML_XSD = b"""<xs:schema xmlns:xs="http://www.w3.org/2001/XMLSchema"
  targetNamespace="http://www.w3.org/XML/1998/namespace">
  <xs:attribute name="lang" type="xs:language"/></xs:schema>"""
_DRIVER_XSD = b"""<xs:schema xmlns:xs="http://www.w3.org/2001/XMLSchema"
  targetNamespace="http://www.w3.org/1999/xhtml" elementFormDefault="qualified">
  <xs:group name="xhtml.BlkStruct.class"><xs:sequence>
    <xs:any namespace="http://www.w3.org/1999/xhtml" processContents="skip"
            minOccurs="0" maxOccurs="unbounded"/>
  </xs:sequence></xs:group></xs:schema>"""


class _StandIns(etree.Resolver):
    def resolve(self, url, pubid, context):
        if url.endswith("/xml.xsd"):
            return self.resolve_string(_XML_XSD, context)
        if url.endswith("/driver.xsd"):
            return self.resolve_string(_DRIVER_XSD, context)
        return None


@lru_cache(maxsize=1)
def _schema_at(path: str) -> etree.XMLSchema:
    parser = etree.XMLParser(no_network=True)
    parser.resolvers.add(_StandIns())
    return etree.XMLSchema(etree.parse(path, parser))


def omg_schema() -> etree.XMLSchema:
    """The OMG ReqIF schema (../shared/data/reqif.xsd) with the stand-in imports."""
    return _schema_at(str(shared_file("reqif.xsd")))


def assert_valid(data: bytes) -> None:
    schema = omg_schema()
    document = etree.fromstring(data)
    assert schema.validate(document), schema.error_log.filter_from_errors()[:3]


def _model(name="qualification"):
    return read_model(stage_bytes(name), "thread.json")


def test_the_hand_written_fixture_is_valid_reqif():
    # Source: OMG ReqIF schema. Guards the fixture the next test reads.
    assert_valid(FIXTURE.read_bytes())


def test_hand_written_reqif_maps_onto_the_model():
    # Mapping of DESIGN.md: IDENTIFIER -> id, LONG-NAME -> name, type LONG-NAME
    # lower-cased with hyphens -> kind / relation, SPEC-HIERARCHY -> parent.
    model = reqif.parse(FIXTURE.read_bytes(), "arm.reqif")
    assert [(e.id, e.kind, e.name, e.parent) for e in model.elements] == [
        ("REQ-ARM-000", "system-requirement", "Charging arm", None),
        ("REQ-ARM-001", "system-requirement", "Arm reach", "REQ-ARM-000"),
        ("REQ-ARM-002", "system-requirement", "Arm retraction", "REQ-ARM-000"),
    ]
    reach = model.elements[1]
    assert reach.text == "The charging arm shall reach the ferry socket\nat every tide level,\nwith the ferry moored."
    assert reach.attributes == {
        "integrity": "C", "priority": 2, "reach_m": 4.5, "safety_related": True,
        "reviewed": "2026-04-10T12:00:00Z", "owner": "arm team",
    }
    assert model.elements[0].text == "Section: requirements on the charging arm."
    assert model.elements[2].attributes == {"safety_related": False}  # DEFAULT-VALUE
    assert [x.triple for x in model.links] == [
        ("REQ-ARM-002", "REQ-ARM-001", "derives-from"),
        ("REQ-ARM-002", "REQ-ARM-404", "derives-from"),
    ]
    assert model.meta == {"name": "Charging arm requirements"}
    assert [e.location.line for e in model.elements] == [70, 79, 110]


def test_type_names_map_through_configuration_and_dangling_relations_are_caught():
    options = {"reqif": {"kinds": {"System Requirement": "requirement"},
                         "relations": {"Derives From": "derives_from"}}}
    model = reqif.parse(FIXTURE.read_bytes(), "arm.reqif", options)
    assert {e.kind for e in model.elements} == {"requirement"}
    # The schema accepts the relation to REQ-ARM-404 (SOURCE/TARGET are plain strings,
    # OMG ReqIF schema); our dangling-link rule must report it, at the relation's line.
    findings = check_model(model, b"", Config()).findings
    dangling = [f for f in findings if f.rule == "dangling-link"]
    assert [(f.link[1], f.location.line) for f in dangling] == [("REQ-ARM-404", 120)]


@pytest.mark.parametrize("stage", STAGES)
def test_written_reqif_validates_against_the_omg_schema(stage):
    # Source: OMG ReqIF schema (../shared/data/reqif.xsd), XHTML content not checked.
    assert_valid(reqif.write(_model(stage)))


@pytest.mark.parametrize("stage", STAGES)
def test_thread_json_to_reqif_and_back_is_the_same_model(stage):
    model = _model(stage)
    back = reqif.parse(reqif.write(model), "t.reqif")
    assert thread_json.to_document(back) == thread_json.to_document(model)


def test_awkward_models_round_trip_and_still_validate():
    # Ids that are not XML names, repeated ids, link ids, a parent cycle, a missing
    # parent, lists of mixed types, text with markup characters.
    document = {
        "format": "tracecheck-thread/1",
        "model": {"name": "arm", "revision": 3, "draft": True},
        "elements": [
            {"id": "1 first", "kind": "requirement", "text": "a < b & c\n  indented", "parent": "B"},
            {"id": "B", "kind": "requirement", "parent": "1 first"},
            {"id": "B", "kind": "function", "name": "again"},
            {"id": "C", "kind": "test", "parent": "nowhere", "attributes": {
                "tags": ["x", "y"], "mixed": [1, "a", True], "n": -4, "r": 1e-300, "b": False}},
        ],
        "links": [
            {"source": "C", "target": "1 first", "relation": "verifies", "id": "L 1",
             "attributes": {"w": 0.25}},
            {"source": "C", "target": "C", "relation": "traces to"},
        ],
    }
    model = thread_json.parse(thread_json.write(thread_json_model(document)), "t.json")
    data = reqif.write(model)
    assert_valid(data)
    assert thread_json.to_document(reqif.parse(data, "t.reqif")) == document


def thread_json_model(document):
    import json

    return thread_json.parse(json.dumps(document).encode(), "t.json")


def test_output_is_deterministic():
    model = _model("concept")
    assert reqif.write(model) == reqif.write(_model("concept"))
    assert b"1970-01-01T00:00:00Z" in reqif.write(model)


def test_reqifz_archive_is_read_with_member_locations():
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("arm.reqif", FIXTURE.read_bytes())
        archive.writestr("images/arm.png", b"\x89PNG not read")
    data = buffer.getvalue()
    assert detect(data, "upload.bin").name == "reqifz"
    model = read_model(data, "arm.reqifz")
    assert [e.id for e in model.elements] == ["REQ-ARM-000", "REQ-ARM-001", "REQ-ARM-002"]
    assert str(model.elements[1].location) == "arm.reqifz!arm.reqif:79"
    with pytest.raises(InputError, match=r"arm.reqifz: not a readable .reqifz archive"):
        reqifz.parse(data[: len(data) // 2], "arm.reqifz")


def test_archive_without_a_reqif_member():
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        archive.writestr("notes.txt", "nothing")
    with pytest.raises(InputError, match="holds no .reqif document"):
        reqifz.parse(buffer.getvalue(), "empty.reqifz")


@pytest.mark.parametrize(
    "change, message",
    [
        (("<SPEC-OBJECT-TYPE-REF>t-req</SPEC-OBJECT-TYPE-REF></TYPE>\n        </SPEC-OBJECT>\n      </SPEC-OBJECTS>",
          "<SPEC-OBJECT-TYPE-REF>t-nope</SPEC-OBJECT-TYPE-REF></TYPE>\n        </SPEC-OBJECT>\n      </SPEC-OBJECTS>"),
         r"arm.reqif:110: SPEC-OBJECT 'REQ-ARM-002' refers to an unknown SPEC-OBJECT-TYPE 't-nope'"),
        (('THE-VALUE="2"', 'THE-VALUE="two"'), r"arm.reqif:92: SPEC-OBJECT 'REQ-ARM-001': attribute 'priority'"),
        (("<ATTRIBUTE-DEFINITION-REAL-REF>a-reach<", "<ATTRIBUTE-DEFINITION-REAL-REF>a-gone<"),
         r"arm.reqif:95: SPEC-OBJECT 'REQ-ARM-001': a value refers to an unknown attribute definition"),
    ],
)
def test_bad_references_and_values_are_located(change, message):
    old, new = change
    text = FIXTURE.read_text()
    assert old in text
    with pytest.raises(InputError, match=message):
        reqif.parse(text.replace(old, new, 1).encode(), "arm.reqif")
