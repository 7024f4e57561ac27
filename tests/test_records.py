"""Records are written whole or not at all, and loading skips what it cannot read."""

import json

import pytest

from shiftbench.records import SCHEMA_VERSION, load_records, write_atomic, write_record


def test_atomic_write_replaces_the_file_and_leaves_no_temporary(tmp_path):
    target = tmp_path / "result.json"
    write_atomic(target, "old")
    write_atomic(target, "new")
    assert target.read_text() == "new"
    assert [path.name for path in tmp_path.iterdir()] == ["result.json"]


def test_a_failed_write_keeps_the_old_file(tmp_path, monkeypatch):
    target = tmp_path / "result.json"
    write_atomic(target, "old")

    def broken_replace(*args):
        raise OSError("disk full")

    monkeypatch.setattr("os.replace", broken_replace)
    with pytest.raises(OSError):
        write_atomic(target, "new")
    assert target.read_text() == "old"
    assert [path.name for path in tmp_path.iterdir()] == ["result.json"]


def test_loader_skips_unreadable_and_foreign_files_and_lists_them(tmp_path):
    write_record(tmp_path / "good", {"schema_version": SCHEMA_VERSION, "status": "completed"})
    (tmp_path / "torn").mkdir()
    (tmp_path / "torn" / "result.json").write_text('{"schema_version": 1, "sta')
    (tmp_path / "future").mkdir()
    (tmp_path / "future" / "result.json").write_text(json.dumps({"schema_version": 99}))
    with pytest.warns(UserWarning):
        frame = load_records([tmp_path])
    assert list(frame["status"]) == ["completed"]
    assert len(frame.attrs["skipped"]) == 2
    assert f"{tmp_path / 'future' / 'result.json'}: record schema version 99 is not known; this shiftbench reads version 1" in frame.attrs["skipped"]


@pytest.mark.parametrize("name", ["..", ".", "", "data.path=../../etc", "a/b", "a%2Fb", "x\\..\\y", "seed=0,arch=fc"])
def test_a_folder_name_from_overrides_is_one_component_inside_its_parent(tmp_path, name):
    from shiftbench.records import safe_dirname

    folder = (tmp_path / safe_dirname(name)).resolve()
    assert folder.parent == tmp_path.resolve() and "/" not in safe_dirname(name)


def test_distinct_override_names_stay_distinct_folders():
    from shiftbench.records import safe_dirname

    names = ["a/b", "a%2Fb", "a_b", "a\\b", "..", "%2E%2E"]
    assert len({safe_dirname(name) for name in names}) == len(names)
