"""The fuzz corpus (``tests/corpus``): every broken or hostile input gets a valid report or one line, never a crash.

For each case: a JSON report with exit 0 or 1 (or, for a case the corpus
marks ``usage``, exit 2 with exactly one stderr line naming the problem and
the fix); never a traceback, never exit 3, no hang; the input bytes are
unchanged and a second run writes byte-identical output.
"""

from __future__ import annotations

import hashlib
import json
import signal
import sys
from pathlib import Path
from types import FrameType
from typing import Iterator

import pytest
from conftest import Run, run_cli

sys.path.insert(0, str(Path(__file__).resolve().parent / "corpus"))
import make_corpus  # noqa: E402

CASES = make_corpus.CASES
MANIFEST = json.loads((CASES / "manifest.json").read_text())
CASE_SECONDS = 120


class Hang(Exception):
    """A case ran past its time."""


def _alarm(signum: int, frame: FrameType | None) -> None:
    raise Hang(f"no answer within {CASE_SECONDS} s")


def _timed_run(*args: str) -> Run:
    previous = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(CASE_SECONDS)
    try:
        return run_cli(*args)
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)


def _digests() -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(CASES.iterdir())}


def _check(table: Path, args: list[str], expected: str) -> None:
    first = _timed_run("check", str(table), *args, "--format", "json")
    assert "Traceback" not in first.err, first.err
    assert first.code != 3, first.err
    if expected == make_corpus.USAGE:
        assert first.code == 2, (first.code, first.err[:500])
        lines = first.err.splitlines()
        assert len(lines) == 1 and lines[0].startswith("prefit: "), first.err
        assert "; " in lines[0], "the line names the problem and, after '; ', the fix"
        assert first.out == ""
    else:
        assert first.code in (0, 1), first.err[:500]
        assert first.err == ""
        document = first.json()
        assert document["complete"] is True and isinstance(document["findings"], list)
    second = _timed_run("check", str(table), *args, "--format", "json")
    assert (second.code, second.out, second.err) == (first.code, first.out, first.err)


def test_the_committed_corpus_is_what_the_script_writes(tmp_path: Path) -> None:
    written = make_corpus.write(tmp_path)
    assert written == MANIFEST
    for path in sorted(tmp_path.iterdir()):
        assert path.read_bytes() == (CASES / path.name).read_bytes(), path.name


@pytest.fixture(scope="module")
def unchanged() -> Iterator[None]:
    """The corpus files hold the same bytes after every case ran."""
    before = _digests()
    yield
    assert _digests() == before


@pytest.mark.parametrize("name", sorted(MANIFEST))
def test_corpus_case(name: str, unchanged: None) -> None:
    case = MANIFEST[name]
    args = [a.replace("{cases}", str(CASES)) for a in case["args"]]
    _check(CASES / case["file"], args, case["expect"])


@pytest.mark.parametrize("name", sorted(make_corpus.LARGE_CASES))
def test_large_corpus_case(name: str, tmp_path: Path) -> None:
    make, args, expected = make_corpus.LARGE_CASES[name]
    table = make(tmp_path)
    before = hashlib.sha256(table.read_bytes()).hexdigest()
    _check(table, args, expected)
    assert hashlib.sha256(table.read_bytes()).hexdigest() == before
