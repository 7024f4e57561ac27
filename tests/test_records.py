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
    assert f"{tmp_path / 'future' / 'result.json'}: record schema version 99 is not known; this shiftbench reads versions 1, 2" in frame.attrs["skipped"]


def test_a_home_in_the_store_is_named_by_the_hash_whatever_the_overrides(tmp_path):
    # Overrides with path separators and '..' never name a folder: only the config's hash does.
    from tests.conftest import composed, home_of_config

    folder = home_of_config(composed([f"results_dir={tmp_path}", "data=file", "data.path=../../etc/x.csv"])).resolve()
    assert folder.parent == (tmp_path / "store").resolve() and len(folder.name) == 16


def test_records_of_the_old_layout_are_read_with_a_note(tmp_path):
    write_record(tmp_path / "new", {"schema_version": SCHEMA_VERSION, "status": "completed"})
    (tmp_path / "old").mkdir()
    (tmp_path / "old" / "result.json").write_text(json.dumps({"schema_version": 1, "status": "completed"}))
    with pytest.warns(UserWarning, match="1 records of the old layout"):
        frame = load_records([tmp_path])
    assert sorted(frame["schema_version"]) == [1, 2]


def test_an_old_results_folder_moves_into_the_store_and_a_rerun_skips_its_jobs(small_config, tmp_path):
    # A record written before the store (version 1, result.json in a job folder), made by hand
    # from a real run's record with the keys version 2 added taken out.
    from shiftbench.job import run_job
    from shiftbench.store import migrate

    config = small_config("arch=fc", f"results_dir={tmp_path / 'scratch'}")
    fresh = run_job(config, None, [], live=False)
    old_config = {k: v for k, v in fresh["config"].items() if k not in ("split", "task")}
    old_record = {**fresh, "schema_version": 1, "config": old_config}
    for key in ("split", "task"):
        old_record.pop(key)
    (tmp_path / "old" / "job0").mkdir(parents=True)
    (tmp_path / "old" / "job0" / "result.json").write_text(json.dumps(old_record))
    assert migrate(tmp_path / "old", tmp_path / "scratch") == (0, 1)  # the same config is already there
    (tmp_path / "old" / "job1").mkdir()
    (tmp_path / "old" / "job1" / "result.json").write_text(json.dumps(old_record))
    assert migrate(tmp_path / "old", tmp_path / "new") == (1, 0)
    assert not list((tmp_path / "old").rglob("result.json"))
    again = run_job(small_config("arch=fc", f"results_dir={tmp_path / 'new'}"), None, [], live=False)
    assert again["skipped"] is True and (tmp_path / "new" / "store" / again["config_hash"] / "record.json").is_file()


def test_load_records_takes_a_str_or_a_path_and_flattens_the_config_into_typed_columns(small_config, tmp_path):
    from shiftbench.job import run_job
    from shiftbench.records import load_records

    for order in (1, 2):
        run_job(small_config(f"arch.order={order}"), None, [], live=False, quiet=True)
    frame = load_records(str(tmp_path))
    assert len(frame) == 2 and len(load_records(tmp_path)) == 2
    assert frame["config.arch.order"].dtype.kind == "i" and frame["config.train.lr"].dtype.kind == "f"
    assert sorted(frame.groupby("config.arch.order").size().index) == [1, 2]
    (record,) = list((tmp_path / "store").rglob("record.json"))[:1]
    assert len(load_records(str(record))) == 1
