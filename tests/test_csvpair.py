"""CSV pair: elements and links files, typed columns, located errors, model specs."""

from __future__ import annotations

import json

import pytest
from click.testing import CliRunner

from tracecheck.cli import cli
from tracecheck.demo import STAGES
from tracecheck.demo.stages import stage_bytes
from tracecheck.errors import InputError
from tracecheck.formats import csvpair, detect, read_model, thread_json
from tracecheck.model import Model

ELEMENTS = (
    "id,kind,name,text,parent,integrity,level:int,safety:bool\n"
    "REQ-SYS-000,requirement,System requirements,,,,,\n"
    'REQ-SYS-001,requirement,Charging power,"The shore charger shall deliver\n1.2 MW.",REQ-SYS-000,C,1,true\n'
    "TST-001,test,Power test,,,,,\n"
)
LINKS = "source,target,relation,id,weight:float\nTST-001,REQ-SYS-001,verifies,L1,0.5\nTST-001,REQ-SYS-404,verifies,,\n"


def run(*args: str):
    return CliRunner().invoke(cli, list(args), catch_exceptions=False)


def _pair(tmp_path, elements=ELEMENTS, links=LINKS):
    folder = tmp_path / "model"
    folder.mkdir(exist_ok=True)
    (folder / "elements.csv").write_text(elements, encoding="utf-8")
    (folder / "links.csv").write_text(links, encoding="utf-8")
    return folder


def test_rows_map_onto_elements_and_links_with_lines():
    model = csvpair.read_pair((ELEMENTS.encode(), "e.csv"), (LINKS.encode(), "l.csv"))
    power = model.by_id["REQ-SYS-001"]
    assert power.text == "The shore charger shall deliver\n1.2 MW."
    assert power.parent == "REQ-SYS-000"
    assert power.attributes == {"integrity": "C", "level": 1, "safety": True}
    assert model.by_id["REQ-SYS-000"].attributes == {}  # empty cell: not set
    assert [str(e.location) for e in model.elements] == ["e.csv:2", "e.csv:3", "e.csv:5"]
    assert [(x.triple, x.id, x.attributes) for x in model.links] == [
        (("TST-001", "REQ-SYS-001", "verifies"), "L1", {"weight": 0.5}),
        (("TST-001", "REQ-SYS-404", "verifies"), None, {}),
    ]
    assert [str(x.location) for x in model.links] == ["l.csv:2", "l.csv:3"]


@pytest.mark.parametrize("stage", STAGES)
def test_thread_json_to_csv_and_back_keeps_elements_and_links(stage):
    model = read_model(stage_bytes(stage), "thread.json")
    files = csvpair.write_pair(model)
    back = csvpair.read_pair((files["elements.csv"], "e.csv"), (files["links.csv"], "l.csv"))
    document = thread_json.to_document(model)
    document.pop("model", None)  # CSV has nowhere to keep the model block
    assert thread_json.to_document(back) == document


def test_awkward_attribute_names_and_values_round_trip():
    document = {
        "format": "tracecheck-thread/1",
        "elements": [
            {"id": "REQ-1", "kind": "requirement", "attributes": {
                "kind": "shadow", "ratio:int": "text", "tags": ["a", 1], "blank": "", "n": 3,
                "multi": "line one\nline two, with comma"}},
            {"id": "REQ-2", "kind": "requirement", "attributes": {"n": "three", "x": 1e300}},
        ],
        "links": [{"source": "REQ-2", "target": "REQ-1", "relation": "derives_from", "attributes": {"id": "x"}}],
    }
    model = thread_json.parse(json.dumps(document).encode(), "t.json")
    files = csvpair.write_pair(model)
    assert files == csvpair.write_pair(model)  # deterministic
    back = csvpair.read_pair((files["elements.csv"], "e.csv"), (files["links.csv"], "l.csv"))
    assert thread_json.to_document(back) == document


@pytest.mark.parametrize(
    "elements, message",
    [
        ("id,name\nREQ-1,x\n", r"e.csv:1: the header has no 'kind' column"),
        ("id,kind,kind\n", r"e.csv:1: row 1, column 3 \('kind'\): column 'kind' appears twice"),
        ("id,kind\nREQ-1,requirement\nREQ-2,\n", r"e.csv:3: row 3, column 2 \('kind'\): empty"),
        ("id,kind,level:int\nREQ-1,requirement,high\n", r"e.csv:2: row 2, column 3 \('level:int'\): invalid literal"),
        ("id,kind\nREQ-1,requirement,extra\n", r"e.csv:2: row 2, column 3: row 2 has 3 cells"),
        ('id,kind\n"REQ-1,requirement\n', r"e.csv:\d+: malformed CSV"),
        ("id,kind,x:json\nREQ-1,requirement,{}\n", r"e.csv:2: row 2, column 3 \('x:json'\): '\{\}' is not a string"),
    ],
)
def test_errors_name_file_row_and_column(elements, message):
    with pytest.raises(InputError, match=message):
        csvpair.parse_elements(elements.encode(), "e.csv")


def test_not_utf8_is_located():
    with pytest.raises(InputError, match=r"e.csv:2: the file is not UTF-8"):
        csvpair.parse_elements(b"id,kind\nREQ-\xff,requirement\n", "e.csv")


def test_configured_column_names_and_attribute_columns():
    data = b"\xef\xbb\xbfKey,Type,Owner,Comment\nREQ-1,requirement,arm team,ignored\n"
    options = {"csv": {"id": "Key", "kind": "Type", "attributes": ["Owner"]}}
    (element,) = csvpair.parse_elements(data, "e.csv", options)
    assert (element.id, element.kind, element.attributes) == ("REQ-1", "requirement", {"Owner": "arm team"})


def test_a_folder_and_two_paths_are_model_specs_and_findings_point_at_rows(tmp_path):
    folder = _pair(tmp_path)
    for spec in (str(folder), f"{folder / 'elements.csv'},{folder / 'links.csv'}"):
        result = run("check", "--format", "json", spec)
        assert result.exit_code == 1, result.output
        findings = json.loads(result.stdout)["findings"]
        dangling = [f for f in findings if f["rule"] == "dangling-link"]
        assert [f["location"] for f in dangling] == [{"file": str(folder / "links.csv"), "line": 3}]


def test_a_folder_without_the_links_file_is_named(tmp_path):
    folder = tmp_path / "half"
    folder.mkdir()
    (folder / "elements.csv").write_text(ELEMENTS)
    result = run("check", str(folder))
    assert result.exit_code == 2
    assert f"{folder / 'links.csv'}: no such file" in result.stderr
    result = run("check", "--input-format", "graphml", str(_pair(tmp_path)))
    assert result.exit_code == 2 and "CSV pair" in result.stderr


def test_detected_by_header_and_read_alone():
    assert detect(ELEMENTS.encode(), "export").name == "csv"
    assert detect(LINKS.encode(), "-").name == "csv"
    alone = read_model(LINKS.encode(), "l.csv")
    assert isinstance(alone, Model) and len(alone.links) == 2 and not alone.elements
