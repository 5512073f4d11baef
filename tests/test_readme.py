"""The README's promises: its configuration example is valid and does what it says."""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

from tracecheck.config import config_from_mapping
from tracecheck.model import Element, Link, Model
from tracecheck.rules.engine import run_rules

README = Path(__file__).resolve().parents[1] / "README.md"


def _toml_blocks():
    return re.findall(r"```toml\n(.*?)```", README.read_text("utf-8"), flags=re.S)


def test_the_configuration_example_is_valid_and_takes_effect():
    (block,) = _toml_blocks()
    config = config_from_mapping(tomllib.loads(block))
    assert "operating-mode" in config.metamodel.kinds
    assert config.metamodel.relations["active_in"].allows("function", "operating-mode")
    model = Model(
        [Element("REQ-SYS-005", "requirement", attributes={"integrity": "D", "status": "approved"}),
         Element("TST-EST-001", "test")],
        [Link("TST-EST-001", "REQ-SYS-005", "verifies")],
    )
    gaps = {f.declaration for f in run_rules(model, config) if f.rule == "coverage"}
    assert "high-integrity-verified-twice" in gaps  # one test where two are required


def test_readme_starts_with_the_job_and_the_two_commands():
    text = README.read_text("utf-8")
    commands = re.findall(r"```sh\n(.*?)```", text, flags=re.S)[:2]
    assert commands[0].strip() == "pip install . && tracecheck demo"
    assert "pip install '.[test]'" in commands[1] and "pytest" in commands[1]
