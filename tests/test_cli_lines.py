"""The command line keeps its promise: one line per problem on stderr, exit 2 for bad data, help for every option."""

from __future__ import annotations

import json
import re
import subprocess
import sys
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from logitscope import LogitFrame, cli

ROOT = Path(__file__).resolve().parents[1]


def _run(capsys, *argv: object) -> tuple[int, str, str]:
    code = cli.main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_version(capsys):
    with pytest.raises(SystemExit) as info:
        cli.main(["--version"])
    assert info.value.code == 0
    version = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["version"]
    assert capsys.readouterr().out.strip() == f"logitscope {version}"


def _entries(help_text: str) -> list[tuple[str, str]]:
    """(invocation, help) of every entry in argparse's positional and option sections."""
    entries: list[tuple[str, str]] = []
    lines = help_text.splitlines()
    in_section = False
    for i, line in enumerate(lines):
        if line.endswith(":") and not line.startswith(" "):
            in_section = line in ("positional arguments:", "options:")
            continue
        m = re.match(r"^( {2}| {4})(\S.*?)(?: {2,}(\S.*))?$", line)
        if not in_section or not m:
            continue
        if m.group(2) == "COMMAND":  # the subcommand group's header line; its entries follow, indented
            continue
        text = m.group(3) or ""
        nxt = lines[i + 1] if i + 1 < len(lines) else ""
        if not text and re.match(r"^ {8,}\S", nxt):  # a long invocation: the help starts on the next line
            text = nxt.strip()
        entries.append((m.group(2), text))
    return entries


@pytest.mark.parametrize("command", [None, "summary", "demo-data", "report", "compare", "demo"])
def test_every_option_and_subcommand_has_a_help_line(capsys, command):
    with pytest.raises(SystemExit):
        cli.main([command, "--help"] if command else ["--help"])
    entries = _entries(capsys.readouterr().out)
    assert len(entries) >= 3
    missing = [inv for inv, text in entries if not text]
    assert not missing, f"no help line for {missing}"
    if command is None:
        assert {"summary", "demo-data", "report"} <= {inv.split()[0] for inv, _ in entries}


def test_a_value_json_cannot_hold_is_null_with_a_reason(capsys, tmp_path):
    # at T = 1e-3 (the lowest temperature accepted) these logits overflow: (1e306 + 1e306) / 1e-3 is beyond the
    # largest float64, so the NLL is infinite, which strict JSON has no number for
    np.savez(tmp_path / "big.npz", logits=np.array([[1e306, -1e306], [0.0, 1.0]]), labels=np.array([1, 0]))
    code, out, err = _run(capsys, "summary", tmp_path / "big.npz", "--json", "--temperature", "1e-3")
    assert code == 0, err

    def refuse(name: str) -> None:
        raise AssertionError(f"{name} in the output")

    s = json.loads(out, parse_constant=refuse)  # the json module, strict: NaN and Infinity are refused
    assert s["nll"] is None
    assert "nll" in s["null_reasons"] and "not a finite number" in s["null_reasons"]["nll"]
    assert set(s["null_reasons"]) == {k for k, v in s.items() if v is None}


def _bad_files(tmp_path: Path) -> list[tuple[list[object], str]]:
    (tmp_path / "folder.npz").mkdir()
    np.savez(tmp_path / "meta2d.npz", logits=np.eye(3) * 2, **{"meta/desk": np.zeros((3, 2))})
    np.savez(tmp_path / "meta0d.npz", logits=np.eye(3) * 2, **{"meta/desk": np.array(5.0)})
    np.savez(tmp_path / "classes0d.npz", logits=np.eye(3) * 2, classes=np.array("abc"))
    np.savez(tmp_path / "texts0d.npz", logits=np.eye(3) * 2, texts=np.array("hello"))
    pd.DataFrame({"logit:a": [0.0, None], "logit:b": [1.0, 0.0]}).to_parquet(tmp_path / "null.parquet")
    pd.DataFrame({"logit:a": [0.0, 2.0], "logit:b": [1.0, 0.0], "label": [0, 1]}).to_parquet(tmp_path / "idx.parquet")
    np.savez(tmp_path / "uint.npz", logits=np.eye(2) * 2, labels=np.array([0, 2**64 - 1], dtype=np.uint64))
    np.savez(tmp_path / "nanids.npz", logits=np.eye(2) * 2, ids=np.array([np.nan, np.nan]))
    return [
        (["summary", tmp_path / "folder.npz"], "is a directory"),
        (["summary", tmp_path / "meta2d.npz"], "meta/desk must be 1-D"),
        (["summary", tmp_path / "meta0d.npz"], "meta/desk must be 1-D"),
        (["summary", tmp_path / "classes0d.npz"], "classes must be one-dimensional"),
        (["summary", tmp_path / "texts0d.npz"], "texts must be one-dimensional"),
        (["summary", tmp_path / "null.parquet"], "column 'logit:a' has missing values (null) at row 1"),
        (["summary", tmp_path / "idx.parquet"], "does not store the class order"),
        (["summary", tmp_path / "uint.npz"], "values [18446744073709551615]"),
        (["summary", tmp_path / "nanids.npz"], "NaN at rows 0, 1"),
        (["report", tmp_path / "folder.npz", "-o", tmp_path / "r.html"], "is a directory"),
    ]


def test_every_data_problem_is_exit_2_and_one_line(capsys, tmp_path):
    for argv, needle in _bad_files(tmp_path):
        code, out, err = _run(capsys, *argv)
        assert code == 2, (argv, err)
        assert out == "" and err.count("\n") == 1 and err.startswith("logitscope: error: "), err
        assert needle in err, (needle, err)


def test_an_unexpected_failure_is_one_line_with_exit_1(capsys, tmp_path, monkeypatch):
    LogitFrame(np.eye(2) * 2, labels=[0, 1]).write(tmp_path / "ok.npz")

    def broken(*args, **kwargs):
        raise KeyError("a bug")

    monkeypatch.setattr(LogitFrame, "summary", broken)
    code, out, err = _run(capsys, "summary", tmp_path / "ok.npz")
    assert code == 1 and out == "" and err.count("\n") == 1 and "internal error" in err
    monkeypatch.setenv("LOGITSCOPE_TRACEBACK", "1")
    with pytest.raises(KeyError):
        cli.main(["summary", str(tmp_path / "ok.npz")])


def test_warnings_are_one_line_each_on_stderr_of_a_real_process(tmp_path):
    # probabilities stored as logits, and labels every row predicts outright: the temperature fit runs to its
    # bound. Both warnings must be one line on stderr, no source line after them, and stdout pure JSON.
    p = np.array([[0.9, 0.1], [0.2, 0.8], [0.7, 0.3]])
    np.savez(tmp_path / "probs.npz", logits=p, labels=np.array([0, 1, 0]))
    argv = [
        sys.executable,
        "-m",
        "logitscope.cli",
        "summary",
        str(tmp_path / "probs.npz"),
        "--json",
        "--fit-temperature",
    ]
    r = subprocess.run(argv, capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    lines = r.stderr.splitlines()
    assert len(lines) == 2, r.stderr
    assert all(line.startswith("logitscope: warning: ") for line in lines)
    assert "from_probabilities" in lines[0] and "(LooksLikeProbabilitiesWarning)" in lines[0]
    assert "bound" in lines[1] and "(RuntimeWarning)" in lines[1]
    assert json.loads(r.stdout)["n_samples"] == 3
