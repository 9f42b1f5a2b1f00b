"""The manifest of an output folder (synthcorona.io.manifest): what it records, and checking a folder against it."""
import hashlib
import json
import os

import synthcorona
from synthcorona.io.manifest import (
    MANIFEST_NAME,
    build_manifest,
    file_entry,
    input_entry,
    listed_files,
    read_manifest,
    table_entry,
    verify_manifest,
)


def test_entries_give_size_and_sha256(tmp_path):
    p = tmp_path / "s.toml"
    p.write_bytes(b"title = 'x'\n")
    digest = hashlib.sha256(b"title = 'x'\n").hexdigest()     # computed here, independently
    assert file_entry(p, "s.toml") == {"name": "s.toml", "size": 12, "sha256": digest}
    assert input_entry(p) == {"path": str(p.resolve()), "size": 12, "sha256": digest}


def test_manifest_records_the_run(tmp_path, table):
    argv = ["synthcorona", "forecast", "a b.toml", "--seed", "3"]
    m = build_manifest([{"name": "z.nc", "size": 1, "sha256": "1"}, {"name": "a.csv", "size": 2, "sha256": "2"}],
                       argv=argv, started="2025-01-01T00:00:00Z", facts={"seed": 3, "table": table_entry(table)})
    assert m["command"] == "synthcorona forecast 'a b.toml' --seed 3" and m["argv"] == argv
    assert m["subcommand"] == "forecast" and m["synthcorona_version"] == synthcorona.__version__
    assert m["seed"] == 3 and m["inputs"] == {} and m["pid"] == os.getpid()
    assert m["table"] == {"path": str(table.path), "content_hash": table.provenance["content_hash"],
                          "chianti_version": "10.1"}
    assert [f["name"] for f in m["files"]] == ["a.csv", "z.nc"]           # sorted by name
    assert m["finished_utc"] >= m["started_utc"] and m["finished_utc"].endswith("Z")
    json.dumps(m)                                                          # plain JSON


def test_unreadable_manifests_list_nothing(tmp_path):
    assert read_manifest(tmp_path) is None and listed_files(None) == []
    (tmp_path / MANIFEST_NAME).write_text("{not json")
    assert read_manifest(tmp_path) is None
    (tmp_path / MANIFEST_NAME).write_text('{"files": [{"name": "a"}, {"size": 1}, "b"]}')
    assert listed_files(read_manifest(tmp_path)) == ["a"]
    assert verify_manifest(tmp_path) == ["a: missing", "files[1]: not a file entry", "files[2]: not a file entry"]
    (tmp_path / MANIFEST_NAME).unlink()
    assert verify_manifest(tmp_path) == [f"{tmp_path / MANIFEST_NAME}: missing or unreadable"]
