"""The walk-through in docs/writing-a-reader.md works as written."""
from __future__ import annotations

import re
import types
from pathlib import Path

from prep import make_registry
from prep.testing import assert_reader_conforms

DOC = Path(__file__).resolve().parents[2] / "docs" / "writing-a-reader.md"


def test_quill_example_passes_the_conformance_suite(tmp_path):
    text = DOC.read_text(encoding="utf-8")
    sample = re.findall(r"## The format\n\n```\n(.*?)```", text, re.S)[0]
    code = re.findall(r"```python\n(.*?)```", text, re.S)[0]
    module = types.ModuleType("headprep_quill")
    exec(compile(code, str(DOC), "exec"), module.__dict__)  # noqa: S102 - our own documentation
    (tmp_path / "session.qpt").write_text(sample, encoding="utf-8")
    work = tmp_path / "work"
    work.mkdir()
    s = assert_reader_conforms(make_registry(entry_points=False, plugins=[module, _bids()]), "quill",
                               tmp_path / "session.qpt", work)
    assert s.labels == ("Fz", "Cz", "T7") and s.provenance.unit == "cm" and len(s.headshape) == 1


def _bids():
    from prep_plugins import sensor_bids
    return sensor_bids


def test_quill_example_scaffolds_as_the_doc_says(tmp_path, capsys):
    """Step 1 of the walk-through (`headprep new-reader quill --sample session.qpt`) succeeds on the doc's
    sample: the magic and unit lines are header lines, label and x/y/z are columns 1-4, the unit is cm."""
    import json

    from prep.cli import main

    text = DOC.read_text(encoding="utf-8")
    sample = tmp_path / "session.qpt"
    sample.write_text(re.findall(r"## The format\n\n```\n(.*?)```", text, re.S)[0], encoding="utf-8")
    assert main(["new-reader", "quill", "--sample", str(sample), "--out", str(tmp_path), "--json"]) == 0
    layout = json.loads(capsys.readouterr().out)["layout"]
    assert layout == {"delim": None, "header": 2, "columns": [1, 2, 3, 4], "unit": "cm"}
