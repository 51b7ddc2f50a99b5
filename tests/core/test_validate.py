"""The command-line check of study files (``python -m allocation.core.validate``)."""

from __future__ import annotations

import json

from allocation.core.limits import STUDY_FILE_MAX_BYTES
from allocation.core.validate import main
from allocation.examples import example_paths


def test_an_example_passes_and_a_broken_copy_names_its_path(tmp_path, capsys):
    example = example_paths()[0]
    assert main([str(example)]) == 0
    document = json.loads(example.read_text(encoding="utf-8"))
    document["tasks"][0]["duration_s"] = "long"  # a duration must be seconds
    broken = tmp_path / "broken.json"
    broken.write_text(json.dumps(document), encoding="utf-8")
    assert main([str(broken)]) == 1
    out = capsys.readouterr().out
    assert "$.tasks[0].duration_s" in out
    assert "broken.json: 1 error(s)" in out


def test_a_missing_or_oversized_file_is_named_and_not_read(tmp_path, capsys):
    big = tmp_path / "big.json"
    big.write_bytes(b" " * (STUDY_FILE_MAX_BYTES + 1))
    assert main([str(tmp_path / "absent.json"), str(big)]) == 1
    err = capsys.readouterr().err
    assert "absent.json: no such file" in err
    assert "STUDY_FILE_MAX_BYTES" in err
    assert main(["--help"]) == 2
