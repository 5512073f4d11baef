"""The renderer registry: rendering one command imports only that command's modules."""

from __future__ import annotations

import json
import subprocess
import sys

from tracecheck import report

SCRIPT = """
import json, sys
from tracecheck import report
report._load(sys.argv[1])
print(json.dumps(sorted(fmt for cmd, fmt in report._RENDERERS if cmd == sys.argv[1])))
"""


def test_each_command_s_modules_register_all_of_its_formats():
    # Oracle: a full load of every renderer module (report.renderers()), compared with a
    # fresh interpreter that loads only the modules the table names for the command.
    every = report.renderers()
    commands = {command for command, _ in every}
    assert commands == set(report._FOR_COMMAND)
    for command in sorted(commands):
        out = subprocess.run([sys.executable, "-c", SCRIPT, command], capture_output=True, text=True, check=True)
        assert json.loads(out.stdout) == sorted(fmt for cmd, fmt in every if cmd == command), command


def test_check_does_not_import_the_embedding():
    out = subprocess.run(
        [sys.executable, "-c", "import sys\nfrom tracecheck import report\nreport._load('check')\n"
         "print('tracecheck.embedding' in sys.modules, 'tracecheck.diff' in sys.modules)"],
        capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["False", "False"]
