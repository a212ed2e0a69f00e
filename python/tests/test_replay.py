"""What must be shown, point 1: steadycal.replay equals the CLI's summary, events and
readings exactly, in f32 and f64, on every shipped scenario; Monitor.push_batch over chunks
of random sizes equals one pass (and the replay's tables); a snapshot taken in Python and
restored by the CLI (`--resume`) continues identically.

The checks compare against the CLI's own files (the reference is the CLI of this
repository, the same core), not against outside values: what is shown is identity."""

from __future__ import annotations

import json
import pickle
import random

import pandas as pd
import pyarrow as pa
import pyarrow.csv as pa_csv
import pytest

import steadycal
from conftest import FEEDS, SCENARIOS, config_of, read_jsonl


def frame(table: pa.Table) -> pd.DataFrame:
    return table.to_pandas()


def cli_readings(path, precision) -> pd.DataFrame:
    schema = steadycal.schemas(precision)["readings"]
    table = pa_csv.read_csv(
        path,
        convert_options=pa_csv.ConvertOptions(
            column_types={f.name: f.type for f in schema},
            null_values=[""],
            strings_can_be_null=False,
        ),
    )
    return table.to_pandas()


def events_as_lines(table: pa.Table):
    """Event rows as the CLI's JSON lines: the fields the kind has, in the table's order."""
    lines = []
    for row in table.to_pylist():
        lines.append({k: v for k, v in row.items() if v is not None or k in ("t",)})
    return lines


def strip_nulls(lines):
    return [{k: v for k, v in line.items() if v is not None or k == "t"} for line in lines]


@pytest.mark.parametrize("precision", ["f32", "f64"])
@pytest.mark.parametrize("name", SCENARIOS)
def test_replay_equals_the_cli(cli, tmp_path, name, precision):
    feed = FEEDS / f"{name}.csv"
    config = config_of(name)
    args = [
        "replay", feed, "--precision", precision, "--quiet",
        "--events", tmp_path / "e.jsonl", "--readings", tmp_path / "r.csv",
        "--summary", tmp_path / "s.json", "--checks", tmp_path / "c.csv",
    ]
    if config:
        args += ["--config", config]
    cli(*args)
    run = steadycal.replay(str(feed), config=config, precision=precision)

    with open(tmp_path / "s.json", encoding="utf-8") as f:
        assert run.summary == json.load(f)
    assert events_as_lines(run.events) == strip_nulls(read_jsonl(tmp_path / "e.jsonl"))
    pd.testing.assert_frame_equal(frame(run.readings), cli_readings(tmp_path / "r.csv", precision), check_exact=True)
    assert run.checks.num_rows == run.summary["checks"]


@pytest.mark.parametrize("precision", ["f32", "f64"])
@pytest.mark.parametrize("name", ["load-cell", "flow-meter-dropout", "co-cell-ageing"])
def test_push_batch_in_random_chunks_equals_one_pass_and_the_replay(name, precision):
    feed = pa_csv.read_csv(
        FEEDS / f"{name}.csv",
        convert_options=pa_csv.ConvertOptions(null_values=[""], column_types={"t": pa.float64(), "raw": pa.float64(), "ref": pa.float64()}),
    )
    config = config_of(name)
    whole = steadycal.Monitor(config, precision)
    events, readings = whole.push_batch(feed)

    chunked = steadycal.Monitor(config, precision)
    rng = random.Random(20261205)  # any seed: the split points are what varies
    parts, start = [], 0
    while start < feed.num_rows:
        size = rng.randint(1, 5000)
        parts.append(chunked.push_batch(feed.slice(start, size)))
        start += size
    assert pa.concat_tables([p[0] for p in parts]).equals(events)
    pd.testing.assert_frame_equal(
        pa.concat_tables([p[1] for p in parts]).to_pandas(), readings.to_pandas(), check_exact=True
    )
    assert chunked.summary() == whole.summary()

    run = steadycal.replay(str(FEEDS / f"{name}.csv"), config=config, precision=precision)
    assert events.equals(run.events)
    pd.testing.assert_frame_equal(readings.to_pandas(), run.readings.to_pandas(), check_exact=True)


def test_push_one_by_one_equals_push_batch():
    feed = pa_csv.read_csv(FEEDS / "gas-cell.csv").slice(0, 3000)
    batch = steadycal.Monitor()
    events, readings = batch.push_batch(feed)
    single = steadycal.Monitor()
    values, raised = [], []
    for row in feed.to_pylist():
        out = single.push(row["t"], row["raw"], row["ref"])
        raised += out["events"]
        if out["reading"] is not None:
            values.append(out["reading"]["value"])
    assert raised == strip_nulls(events.to_pylist())
    assert values == [v for v in readings.column("value").to_pylist() if v is not None]


@pytest.mark.parametrize("precision", ["f32", "f64"])
def test_a_python_snapshot_resumes_in_the_cli(cli, tmp_path, precision):
    name = "co-cell-ageing"
    feed = FEEDS / f"{name}.csv"
    config = config_of(name)
    lines = feed.read_text().splitlines(keepends=True)
    split = 3000
    (tmp_path / "rest.csv").write_text(lines[0] + "".join(lines[1 + split:]))
    cli("replay", feed, "--config", config, "--precision", precision, "--quiet", "--events", tmp_path / "whole.jsonl")

    table = pa_csv.read_csv(feed, convert_options=pa_csv.ConvertOptions(null_values=[""]))
    monitor = steadycal.Monitor(config, precision)
    first, _ = monitor.push_batch(table.slice(0, split))
    # Through pickle as well: the snapshot is what travels.
    monitor = pickle.loads(pickle.dumps(monitor))
    (tmp_path / "state.bin").write_bytes(monitor.snapshot())
    cli("replay", tmp_path / "rest.csv", "--resume", tmp_path / "state.bin", "--precision", precision,
        "--quiet", "--events", tmp_path / "rest.jsonl")

    whole = read_jsonl(tmp_path / "whole.jsonl")
    assert strip_nulls(first.to_pylist()) + read_jsonl(tmp_path / "rest.jsonl") == whole
    assert len(whole) > len(first.to_pylist()) > 0


def test_restore_reads_the_cli_snapshot_and_keeps_precision(cli, tmp_path):
    feed = FEEDS / "gas-cell.csv"
    cli("replay", feed, "--precision", "f64", "--quiet", "--save-snapshot", tmp_path / "s.bin")
    monitor = steadycal.Monitor.restore((tmp_path / "s.bin").read_bytes())
    assert monitor.precision == "f64"
    assert monitor.samples == 21600
    assert monitor.snapshot() == (tmp_path / "s.bin").read_bytes()


def test_assess_is_the_cli_json(cli):
    run = FEEDS / "lab" / "co_gas_cell.csv"
    out = cli("assess", run, "--json")
    assert steadycal.assess(str(run)) == json.loads(out.stdout)


def test_config_as_a_dict_equals_the_file(tmp_path):
    feed = str(FEEDS / "load-cell.csv")
    from_file = steadycal.replay(feed, config=FEEDS / "load-cell.monitor.toml")
    from_dict = steadycal.replay(
        feed,
        config={"range": {"low": 10.0, "high": 700.0}, "basis": {"temperature": True, "temperature_reference": 20.0}},
    )
    assert from_dict.events.equals(from_file.events)
    assert from_dict.summary["params"] == from_file.summary["params"]


def test_run_shows_itself_in_a_notebook():
    run = steadycal.replay(str(FEEDS / "gas-cell.csv"))
    page = run._repr_html_()
    assert "<table>" in page and "log" in page
    assert "rung='log'" in repr(run)
