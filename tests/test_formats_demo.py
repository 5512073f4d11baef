"""The formats demo step: the checked stage also as ReqIF and GraphML, same findings."""

from __future__ import annotations

import io
import re

import networkx as nx
from click.testing import CliRunner

from tests.test_reqif import assert_valid
from tracecheck.cli import cli


def test_demo_writes_reqif_and_graphml_and_checks_them(tmp_path):
    result = CliRunner().invoke(cli, ["demo", str(tmp_path / "demo")], catch_exceptions=False)
    assert result.exit_code == 0, result.output
    reports = tmp_path / "demo" / "reports"
    assert result.stdout.count("the same as model/thread.json") == 2
    assert "NOT the same" not in result.stdout
    reqif = (reports / "thread.reqif").read_bytes()
    assert_valid(reqif)  # OMG ReqIF schema, ../shared/data/reqif.xsd (XHTML content not checked)
    # networkx's own GraphML reader takes the demo's GraphML copy.
    graph = nx.read_graphml(io.BytesIO((reports / "thread.graphml").read_bytes()), force_multigraph=True)
    line = next(x for x in result.stdout.splitlines() if x.startswith("$ tracecheck check reports/thread.graphml"))
    links = int(re.search(r"(\d+) links", line).group(1))
    assert links > 0 and graph.number_of_edges() == links
