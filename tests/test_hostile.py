"""Hostile XML and archives: each is refused with exit 2, a message naming the file, no
traceback, and nothing read from anywhere the document points at."""

from __future__ import annotations

import io
from pathlib import Path

import pytest
from click.testing import CliRunner
from lxml import etree

from tracecheck.cli import cli
from tracecheck.formats import xmlsafe

HOSTILE = Path(__file__).resolve().parents[1] / "fixtures" / "hostile"
CASES = sorted(p for p in HOSTILE.iterdir() if p.name != "README.md")
GRAPHML_BODY = (
    '<graphml xmlns="http://graphml.graphdrawing.org/xmlns">'
    '<key id="k" for="node" attr.name="kind"/><key id="n" for="node" attr.name="name"/>'
    '<graph edgedefault="directed"><node id="REQ-1"><data key="k">requirement</data>'
    "<data key=\"n\">{name}</data></node></graph></graphml>\n"
)


def run(*args: str):
    return CliRunner().invoke(cli, list(args), catch_exceptions=False)


def assert_refused(result, path: Path, *needles: str) -> None:
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.stderr
    assert str(path) in result.stderr
    assert result.stdout == ""
    assert len(result.stderr.splitlines()) <= 3
    for needle in needles:
        assert needle in result.stderr


def test_the_corpus_covers_every_kind_of_attack():
    names = {p.stem for p in CASES}
    assert {"billion-laughs", "external-entity", "parameter-entity", "external-subset",
            "malformed", "wrong-namespace", "truncated"} <= names


@pytest.mark.parametrize("path", CASES, ids=[p.name for p in CASES])
def test_hostile_input_is_refused(path):
    assert_refused(run("check", str(path)), path)


def test_malformed_xml_names_its_line():
    path = HOSTILE / "malformed.graphml"
    assert_refused(run("check", str(path)), path, f"{path}:7:", "malformed XML")


def test_entity_declarations_are_refused_before_anything_is_read():
    for name in ("billion-laughs.graphml", "billion-laughs-utf16.graphml", "parameter-entity.reqif"):
        assert_refused(run("check", str(HOSTILE / name)), HOSTILE / name, "declares entities")
    path = HOSTILE / "external-subset.graphml"
    assert_refused(run("check", str(path)), path, "external DTD")


def _secret(tmp_path: Path) -> tuple[Path, str]:
    token = "FERRY-SECRET-7f3a9c"
    secret = tmp_path / "secret.txt"
    secret.write_text(token + "\n")
    return secret, token


def test_external_entity_to_a_local_file_leaks_nothing(tmp_path):
    secret, token = _secret(tmp_path)
    doc = tmp_path / "leak.graphml"
    doc.write_text(
        f'<?xml version="1.0"?>\n<!DOCTYPE graphml [<!ENTITY s SYSTEM "{secret.as_uri()}">]>\n'
        + GRAPHML_BODY.format(name="&s;")
    )
    for args in (["check", str(doc)], ["check", "--format", "json", str(doc)],
                 ["check", "--input-format", "graphml", str(doc)]):
        result = run(*args)
        assert_refused(result, doc)
        assert token not in result.output


def test_the_parser_configuration_itself_does_not_resolve_entities(tmp_path):
    # Defence in depth: even past the DOCTYPE check, the hardened options leave an
    # external entity unexpanded (lxml >= 6.1.3, SAFE_OPTIONS).
    secret, token = _secret(tmp_path)
    data = (f'<!DOCTYPE r [<!ENTITY s SYSTEM "{secret.as_uri()}">]><r>&s;</r>').encode()
    texts = [
        etree.tostring(element)
        for _event, element in etree.iterparse(io.BytesIO(data), **xmlsafe.SAFE_OPTIONS)
    ]
    assert texts and all(token.encode() not in text for text in texts)


def test_entities_hidden_after_a_large_comment_are_still_refused(tmp_path):
    # Beyond the byte scan's window: libxml2's own view of the DOCTYPE catches it.
    doc = tmp_path / "late.graphml"
    doc.write_text(
        "<!--" + "x" * (2 * 1024 * 1024) + "-->\n"
        '<!DOCTYPE graphml [<!ENTITY a "aaaaaaaaaa">]>\n' + GRAPHML_BODY.format(name="&a;")
    )
    assert_refused(run("check", str(doc)), doc, "declares entities")


def test_quadratic_blowup_is_refused(tmp_path):
    doc = tmp_path / "blowup.graphml"
    doc.write_text(
        '<!DOCTYPE graphml [<!ENTITY a "' + "a" * 100_000 + '">]>\n'
        + GRAPHML_BODY.format(name="&a;" * 5000)
    )
    assert_refused(run("check", str(doc)), doc, "declares entities")


def test_excessive_nesting_is_refused(tmp_path):
    doc = tmp_path / "deep.graphml"
    doc.write_text(
        '<graphml xmlns="http://graphml.graphdrawing.org/xmlns"><graph>'
        + "<node id='n'><graph>" * 5000 + "</graph></node>" * 5000 + "</graph></graphml>"
    )
    assert_refused(run("check", str(doc)), doc, "malformed XML")


def test_unknown_content_names_every_format_tried(tmp_path):
    doc = tmp_path / "export.dat"
    doc.write_bytes(b"\x00\x01 binary export")
    result = run("check", str(doc))
    assert_refused(result, doc, "tried: ")
    for name in ("graphml", "reqif", "reqifz", "thread-json"):
        assert name in result.stderr


def test_an_error_names_this_documents_line_not_the_previous_ones(tmp_path):
    # lxml's error log outlives a parse; a second, different error must not inherit
    # the first one's line.
    path = HOSTILE / "malformed.graphml"
    assert_refused(run("check", str(path)), path, f"{path}:7:")
    other = tmp_path / "other.graphml"
    other.write_text("<graphml xmlns='http://graphml.graphdrawing.org/xmlns'>\n<graph>\n</graphml>\n")
    result = run("check", str(other))
    assert_refused(result, other, f"{other}:3:")
    assert ":7:" not in result.stderr
