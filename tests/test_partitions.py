"""The species partitions of the engine (pipeline/partitions.py): every table in exactly
one partition, and a release built from several partitions in several worker processes byte
for byte the release built from one."""

import json
import subprocess
import sys
from pathlib import Path

from thermoledger import build, partitions
from thermoledger.ingest import sources

from .conftest import run_cli, tree_hashes

RAW = Path(__file__).resolve().parent.parent / "raw"


def _read(part=None):
    got = sources.ingest(RAW, part)
    return {(t.meta.file, t.meta.species_id) for t in got.tables}, got


def test_every_table_lies_in_exactly_one_partition_and_phases_stay_together():
    whole, _ = _read()
    for count in (2, 3, 5):
        parts = [_read(partitions.Part(k, count))[0] for k in range(count)]
        assert set().union(*parts) == whole
        assert sum(len(p) for p in parts) == len(whole)       # disjoint
        for p in parts:        # the phases of a species name share a partition
            names = {sid.rsplit("(", 1)[0] for _, sid in p}
            assert not names & {sid.rsplit("(", 1)[0] for q in parts if q is not p
                                for _, sid in q}


def test_a_partition_is_the_same_in_another_process():
    names = ["N2", "Ti", "C2H4", "FeO", "s00042"]
    here = [partitions.partition_of(n, 7) for n in names]
    code = ("from thermoledger.partitions import partition_of\n"
            f"print([partition_of(n, 7) for n in {names!r}])")
    there = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                           timeout=60, env={"PYTHONHASHSEED": "123", "PATH": ""}).stdout
    assert json.loads(there) == here and len(set(here)) > 1


def test_a_release_from_two_worker_processes_is_byte_identical(tmp_path):
    """The demo (several sources per species, a coefficient-set file of several species,
    phases linked by transitions, quarantined tables) built in one process and in two."""
    one = build.build(RAW, tmp_path / "one", workers=1)
    two = build.build(RAW, tmp_path / "two", workers=2)
    assert tree_hashes(tmp_path / "one") == tree_hashes(tmp_path / "two")
    assert len(one.fitted) == len(two.fitted) == 17


def test_check_gives_the_same_findings_in_any_number_of_workers(capsys):
    got = {}
    for n in (1, 3):
        code, out, _ = run_cli(capsys, "check", "--raw", RAW, "--json", "--workers", n)
        got[n] = (code, out)
    assert got[1] == got[3] and json.loads(got[1][1])["counts"]["error"] == 2


def test_the_worker_count_follows_the_size_of_the_build(tmp_path, monkeypatch):
    assert partitions.worker_count(RAW, 3) == 3
    assert partitions.worker_count(RAW) == 1                     # a small build
    monkeypatch.setattr(partitions, "PARALLEL_FROM", 5)
    assert partitions.worker_count(RAW) == min(partitions._cores(), 4)
    (tmp_path / "bad").mkdir()
    (tmp_path / "bad" / "source.json").write_text("[" * 5000)   # unreadable: counts as none
    assert partitions.listed_entries(tmp_path) == 0
