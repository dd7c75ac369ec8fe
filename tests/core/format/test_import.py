"""Importing lines logs: round trips, CSV = JSON Lines, one message per bad-line kind, atomic output.

The expected arrays come from the traces the logs were exported from (or from the scenario in
``recording_helpers``); the messages are the ones ``log_format.md`` documents.
"""
from __future__ import annotations

import csv
import json
import os
from importlib.resources import files

import numpy as np
import pytest

import recording_helpers as rh
from paths import ROOT
from resweep.core import open_trace, write_trace
from resweep.core.format.importers.export import export_lines
from resweep.core.format.importers.log_import import import_log
from resweep.core.format.importers.records import LogLineError
from resweep.core.format.importers.sources import CSV_COLUMNS

SAMPLES = [ROOT / "sample_traces" / "quarry.h5", ROOT / "sample_traces" / "quarry_far_f32.h5"]


def assert_same_trace(a_path, b_path):
    """Every array a check or the viewer reads is identical (bit for bit, same dtype)."""
    with open_trace(a_path) as a, open_trace(b_path) as b:
        assert (a.frame_count, a.entity_count, a.chunk_size) == (b.frame_count, b.entity_count, b.chunk_size)
        assert a.frame_dtype == b.frame_dtype
        for key in ("ids", "time", "edits", "chunk_origin", "chunk_blocks"):
            np.testing.assert_array_equal(getattr(a, key), getattr(b, key), err_msg=key)
        assert a.names == b.names and a.voxel_size == b.voxel_size and a.up_axis == b.up_axis
        np.testing.assert_array_equal(a.shapes.boxes, b.shapes.boxes)
        np.testing.assert_array_equal(a.shapes.box_start[:a.shapes.count + 1], b.shapes.box_start[:b.shapes.count + 1])
        fa, fb = a.frames(0, a.frame_count), b.frames(0, b.frame_count)
        for key in ("start", "motion", "end", "active", "half"):
            x, y = getattr(fa, key), getattr(fb, key)
            assert x.dtype == y.dtype, key
            np.testing.assert_array_equal(x, y, err_msg=key)
        ga = fa.grounded if fa.grounded is not None else np.zeros_like(fa.active)
        np.testing.assert_array_equal(ga, fb.grounded)


def export(trace_path, out):
    with open_trace(trace_path) as t, open(out, "w") as fh:
        export_lines(t, fh)
    return out


@pytest.mark.parametrize("sample", SAMPLES, ids=lambda p: p.name)
def test_demo_traces_round_trip_through_json_lines(tmp_path, sample):
    log = export(sample, tmp_path / "demo.jsonl")
    report = import_log(log, tmp_path / "back.h5")
    assert not report.skipped
    assert_same_trace(sample, tmp_path / "back.h5")


def test_spawn_despawn_recording_round_trips(tmp_path):
    write_trace(tmp_path / "one.h5", **rh.dense(120))
    import_log(export(tmp_path / "one.h5", tmp_path / "one.jsonl"), tmp_path / "back.h5")
    assert_same_trace(tmp_path / "one.h5", tmp_path / "back.h5")


def _split_for_csv(log, world_out, csv_out):
    """JSON Lines -> world file (header, chunks, edits) + CSV of the entity-frames."""
    with open(log) as src, open(world_out, "w") as w, open(csv_out, "w", newline="") as c:
        out = csv.writer(c)
        out.writerow(CSV_COLUMNS)
        for line in src:
            rec = json.loads(line)
            if "type" in rec:
                w.write(line)
                continue
            row = {k: rec.get(k, "") for k in ("frame", "time", "id", "name")}
            for v in ("half_extents", "start", "motion", "end"):
                for a, x in zip("xyz", rec.get(v, ("", "", ""))):
                    row[f"{v}_{a}"] = repr(x) if x != "" else ""
            row["time"] = repr(rec["time"])
            row["active"] = "false" if rec.get("active") is False else ""
            row["grounded"] = "1" if rec.get("grounded") else ""
            out.writerow([row[k] for k in CSV_COLUMNS])


def test_csv_and_json_lines_import_identically(tmp_path):
    write_trace(tmp_path / "one.h5", **rh.dense(90))
    log = export(tmp_path / "one.h5", tmp_path / "one.jsonl")
    _split_for_csv(log, tmp_path / "world.jsonl", tmp_path / "frames.csv")
    import_log(log, tmp_path / "a.h5")
    import_log(tmp_path / "frames.csv", tmp_path / "b.h5", world_path=tmp_path / "world.jsonl")
    assert_same_trace(tmp_path / "a.h5", tmp_path / "b.h5")
    assert_same_trace(tmp_path / "one.h5", tmp_path / "b.h5")


def test_exported_lines_follow_the_shipped_json_schema(tmp_path):
    import jsonschema  # an outside validator checks the shipped schema
    schema = json.loads(files("resweep.core.format.importers").joinpath("log_schema.json").read_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    v = jsonschema.Draft202012Validator(schema)
    log = export(SAMPLES[0], tmp_path / "demo.jsonl")
    with open(log) as fh:
        for n, line in enumerate(fh, 1):
            errors = list(v.iter_errors(json.loads(line)))
            assert not errors, f"line {n}: {errors[0].message}"
    assert list(v.iter_errors({"frame": 1, "id": 2, "start": [0, 0, 0], "motion": [0, 0, 0], "end": [0, 0]}))


HEAD = '{"type":"header","chunk_size":2}\n{"type":"chunk","origin":[0,0,0],"blocks":[1,1,0,0,1,1,0,0]}\n'
ROW = '{{"frame":{f},"id":{i},"half_extents":[0.4,0.4,0.4],"start":[1,2,1],"motion":[0,0,0],"end":[1,2,1]}}\n'
OK2 = ROW.format(f=0, i=1) + ROW.format(f=0, i=2)

# (log text, line, kind, message after "line N: "), one per bad-line kind of log_format.md
BAD = [
    (HEAD + '{"frame":0,"id":1,\n', 3, "json", "not valid JSON ("),
    (HEAD + '[1, 2]\n', 3, "object", "expected a JSON object, got a list of 2"),
    (HEAD + '{"type":"entity"}\n', 3, "type", "unknown record `type` 'entity' (expected one of frame, header, chunk, "
                                              "voxel, edit)"),
    (HEAD + '{"frame":0,"id":1,"half_extents":[1,1,1],"motion":[0,0,0],"end":[1,2,1]}\n', 3, "missing",
     "`start` is missing"),
    (HEAD + '{"frame":0,"id":1,"half_extents":[1,1,1],"start":[1,2,1],"motion":[0,0,0],"end":[1,2]}\n', 3, "count",
     "`end` needs 3 numbers, got 2"),
    (HEAD + '{"frame":0,"id":1,"half_extents":[1,1,1],"start":[1,"a",1],"motion":[0,0,0],"end":[1,2,1]}\n', 3,
     "number", "`start` holds the string 'a', not a number"),
    (HEAD + '{"frame":0,"id":1.5,"half_extents":[1,1,1],"start":[1,2,1],"motion":[0,0,0],"end":[1,2,1]}\n', 3,
     "integer", "`id` must be an integer, got 1.5"),
    (HEAD + '{"frame":0,"id":1,"half_extents":[1,1,1],"start":[1,2,1],"motion":[0,0,0],"end":[1,2,1],"active":1}\n',
     3, "bool", "`active` must be true or false, got 1"),
    (HEAD + '{"frame":0,"id":1,"name":7,"half_extents":[1,1,1],"start":[1,2,1],"motion":[0,0,0],"end":[1,2,1]}\n',
     3, "string", "`name` must be a string, got 7"),
    (HEAD + '{"type":"chunk","origin":[1,0,0],"rle":[[8,0]]}\n', 3, "range",
     "`origin` [1, 0, 0] is not a multiple of chunk_size 2"),
    (HEAD + ROW.format(f=3, i=1) + ROW.format(f=2, i=1), 4, "order",
     "`frame` 2 comes after frame 3; records must be in frame order"),
    (HEAD + OK2 + '{"type":"voxel","at":[0,0,0],"block":1}\n', 5, "order",
     "voxel records must come before the first entity-frame (the world is written up front)"),
    (HEAD + OK2 + ROW.format(f=1, i=1) + '{"type":"edit","frame":0,"at":[0,0,0],"block":1}\n', 6, "order",
     "edit for frame 0 comes after frame 1 was read"),
    (HEAD + OK2 + ROW.format(f=0, i=2), 5, "duplicate", "entity 2 already has a record in this frame (line 4)"),
    (HEAD + '{"frame":0,"time":0.5,"id":1,"half_extents":[1,1,1],"start":[1,2,1],"motion":[0,0,0],"end":[1,2,1]}\n'
     '{"frame":0,"time":0.25,"id":2,"half_extents":[1,1,1],"start":[1,2,1],"motion":[0,0,0],"end":[1,2,1]}\n', 4,
     "time", "`time` 0.25 differs from 0.5 given for frame 0 on line 3"),
    (HEAD + OK2 + '{"frame":1,"id":3,"start":[1,2,1],"motion":[0,0,0],"end":[1,2,1]}\n', 5, "size",
     "entity 3 appears for the first time without `half_extents`"),
    (HEAD + '{"type":"chunk","origin":[2,0,0],"blocks":[1,1,0]}\n', 3, "count",
     "`blocks` needs 8 numbers (chunk_size 2 cubed), got 3"),
    (HEAD + '{"type":"chunk","origin":[2,0,0],"rle":[[5,1]]}\n', 3, "count",
     "`rle` covers 5 voxels, needs 8 (chunk_size 2 cubed)"),
    (HEAD + '{"type":"chunk","origin":[0,0,0],"rle":[[8,1]]}\n', 3, "duplicate",
     "chunk at [0, 0, 0] was already given on line 2"),
    (HEAD + '{"frame":0,"id":1,"half_extents":[1,1,1],"start":[1,2,1],"motion":[0,0,0],"end":[1,2,1]}\n'
     '{"time":0.5,"id":2,"half_extents":[1,1,1],"start":[1,2,1],"motion":[0,0,0],"end":[1,2,1]}\n', 4, "missing",
     "`frame` is missing (earlier records number their frames)"),
    (HEAD + '{"id":1,"half_extents":[1,1,1],"start":[1,2,1],"motion":[0,0,0],"end":[1,2,1]}\n', 3, "missing",
     "needs `frame` or `time`"),
]


@pytest.mark.parametrize("text,line,kind,message", BAD, ids=[f"{b[2]}-{i}" for i, b in enumerate(BAD)])
def test_each_bad_line_kind_names_line_and_field(tmp_path, text, line, kind, message):
    log = tmp_path / "bad.jsonl"
    log.write_text(text)
    with pytest.raises(LogLineError) as err:
        import_log(log, tmp_path / "out.h5")
    assert (err.value.line, err.value.kind) == (line, kind)
    assert str(err.value).startswith(f"{log}: line {line}: {message}")
    assert os.listdir(tmp_path) == ["bad.jsonl"]  # no trace, no temporary file


def test_skip_bad_counts_lines_by_reason(tmp_path):
    log = tmp_path / "mixed.jsonl"
    good = [ROW.format(f=f, i=i) for f in range(3) for i in (1, 2)]
    bad = ['{"frame":1,"id":1,"start":[1,2,1],"motion":[0,0],"end":[1,2,1]}\n', 'not json\n',
           '{"frame":2,"id":2,"half_extents":[1,1,1],"start":[1,2,1],"motion":[0,0,0],"end":[1,2,1]}\n',
           '{"frame":2,"id":1,"start":[1,2,1],"motion":[0,0,0],"end":[1]}\n']
    log.write_text(HEAD + "".join(good[:3]) + bad[0] + bad[1] + "".join(good[3:]) + bad[2] + bad[3])
    report = import_log(log, tmp_path / "out.h5", skip_bad=True)
    assert dict(report.skipped) == {"count": 2, "json": 1, "duplicate": 1}
    with open_trace(tmp_path / "out.h5") as t:
        assert t.frame_count == 3 and list(t.ids) == [1, 2] and t.frames(0, 3).active.all()


def test_size_change_and_gaps_are_reported(tmp_path):
    log = tmp_path / "sizes.jsonl"
    crouch = ROW.format(f=4, i=1).replace("[0.4,0.4,0.4]", "[0.4,0.2,0.4]")
    log.write_text(HEAD + OK2 + ROW.format(f=1, i=1).replace('"half_extents":[0.4,0.4,0.4],', "") + crouch)
    report = import_log(log, tmp_path / "out.h5")
    assert "entity 1 changes size on line 6: [0.4, 0.4, 0.4] -> [0.4, 0.2, 0.4]" in report.notes
    assert "frames 2..3 have no records; written as empty frames" in report.notes
    with open_trace(tmp_path / "out.h5") as t:
        blk = t.frames(0, t.frame_count)
        assert t.frame_count == 5 and not blk.active[2:4].any()
        np.testing.assert_array_equal(blk.half[4, 0], [0.4, 0.2, 0.4])
        np.testing.assert_array_equal(t.time, np.arange(5) / 60.0)


def test_interrupted_import_leaves_nothing(tmp_path):
    log = export(SAMPLES[0], tmp_path / "demo.jsonl")

    def stop(done, total):
        if done > total // 2:  # mid-file: frames were already flushed to the temporary file
            assert any(n.endswith(".part") for n in os.listdir(tmp_path))
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        import_log(log, tmp_path / "out.h5", progress=stop, flush_every=16)
    assert os.listdir(tmp_path) == ["demo.jsonl"]


def test_cli_import_one_line_error_and_summary(tmp_path, capsys):
    from resweep.app.cli.main import main
    log = tmp_path / "bad.jsonl"
    log.write_text(HEAD + '{"frame":0,"id":1,"half_extents":[1,1,1],"start":[1,2,1],"motion":[0,0,0],"end":[1,2]}\n')
    assert main(["import", str(log), "-o", str(tmp_path / "t.h5")]) == 2
    err = capsys.readouterr().err
    assert err == f"resweep import: {log}: line 3: `end` needs 3 numbers, got 2\n"
    assert main(["import", str(log), "-o", str(tmp_path / "t.h5"), "--skip-bad"]) == 0
    assert "skipped 1 bad lines: count 1" in capsys.readouterr().out
    assert main(["import", str(log), "-o", str(log)]) == 2
    assert "is an input; refusing to overwrite it" in capsys.readouterr().err
    assert main(["export-lines", str(SAMPLES[0]), "-o", str(tmp_path / "d.jsonl")]) == 0
    assert main(["import", str(tmp_path / "d.jsonl"), "-o", str(tmp_path / "d.h5")]) == 0
    assert_same_trace(SAMPLES[0], tmp_path / "d.h5")
