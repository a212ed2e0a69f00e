"""What must be shown, point 2: on a real local[2] SparkSession, replay_channels over 16
channels built from the shipped scenarios equals `steadycal fleet` on the same files, field
for field, and channel_events equals each channel's CLI events, with both layouts
(mapInArrow over sorted partitions, groupBy().applyInArrow). The reference is the CLI of
this repository on the same rows: what is shown is identity."""

from __future__ import annotations

import json
import shutil

import pyarrow as pa
import pyarrow.csv as pa_csv
import pytest

import steadycal
from steadycal import spark as sc_spark
from conftest import FEEDS, NUMERIC_TIME, config_of, read_jsonl

CHANNELS = 16


def channel_files(tmp_path):
    """16 channels: the scenarios with seconds as time, in turn, each with its configuration
    beside it (the layout `fleet` reads)."""
    out = tmp_path / "fleet"
    out.mkdir()
    channels = {}
    for i in range(CHANNELS):
        name = NUMERIC_TIME[i % len(NUMERIC_TIME)]
        channel = f"ch{i:02d}-{name}"
        shutil.copy(FEEDS / f"{name}.csv", out / f"{channel}.csv")
        if config_of(name):
            shutil.copy(config_of(name), out / f"{channel}.monitor.toml")
        channels[channel] = name
    return out, channels


def frame_of(spark, directory, channels):
    tables = []
    for channel in channels:
        table = pa_csv.read_csv(
            directory / f"{channel}.csv",
            convert_options=pa_csv.ConvertOptions(
                null_values=[""],
                column_types={"t": pa.float64(), "raw": pa.float64(), "ref": pa.float64(), "temp": pa.float64()},
            ),
        )
        if "temp" not in table.column_names:
            table = table.append_column("temp", pa.nulls(table.num_rows, pa.float64()))
        table = table.select(["t", "raw", "ref", "temp"])
        tables.append(table.append_column("channel", pa.array([channel] * table.num_rows)))
    # From Arrow directly: through pandas a NaN raw (a sample the monitor rejects) would
    # turn into a null (no sample).
    return spark.createDataFrame(pa.concat_tables(tables))


@pytest.fixture(scope="module")
def fleet(tmp_path_factory, spark, cli):
    directory, channels = channel_files(tmp_path_factory.mktemp("spark"))
    out = cli("fleet", directory, "--jobs", "2", "--json", "-")
    rows = {row.pop("file").removesuffix(".csv"): row for row in json.loads(out.stdout)}
    configs = {c: config_of(name) for c, name in channels.items() if config_of(name)}
    return directory, channels, rows, configs, frame_of(spark, directory, channels)


@pytest.mark.parametrize("method", ["partition", "group"])
def test_replay_channels_equals_fleet(fleet, method):
    directory, channels, expected, configs, df = fleet
    got = sc_spark.replay_channels(df, channel="channel", temp="temp", configs=configs, method=method)
    rows = {row["channel"]: row.asDict() for row in got.collect()}
    assert sorted(rows) == sorted(channels)
    for channel, row in rows.items():
        del row["channel"]
        assert row == expected[channel], channel


@pytest.mark.parametrize("method", ["partition", "group"])
def test_channel_events_equal_the_cli(fleet, cli, tmp_path, method):
    directory, channels, _, configs, df = fleet
    got = sc_spark.channel_events(df, channel="channel", temp="temp", configs=configs, method=method)
    by_channel = {}
    for row in got.collect():
        line = {k: v for k, v in row.asDict().items() if v is not None or k == "t"}
        by_channel.setdefault(line.pop("channel"), []).append(line)
    for channel in channels:
        args = ["replay", directory / f"{channel}.csv", "--quiet", "--events", tmp_path / "e.jsonl"]
        if channel in configs:
            args += ["--config", configs[channel]]
        cli(*args)
        expected = [{k: v for k, v in line.items() if v is not None or k == "t"} for line in read_jsonl(tmp_path / "e.jsonl")]
        events = sorted(by_channel.get(channel, []), key=lambda e: (e["seq"], e["kind"]))
        expected = sorted(expected, key=lambda e: (e["seq"], e["kind"]))
        assert events == expected, channel


def test_config_from_a_column(spark):
    table = pa_csv.read_csv(FEEDS / "load-cell.csv", convert_options=pa_csv.ConvertOptions(null_values=[""]))
    text = (FEEDS / "load-cell.monitor.toml").read_text()
    table = table.append_column("channel", pa.array(["a"] * table.num_rows))
    table = table.append_column("monitor", pa.array([text] * table.num_rows))
    df = spark.createDataFrame(table)
    row = sc_spark.replay_channels(df, channel="channel", temp="temp", config_column="monitor").collect()[0]
    run = steadycal.replay(str(FEEDS / "load-cell.csv"), config=FEEDS / "load-cell.monitor.toml")
    expected = run.fleet_row("a")
    assert row["gain"] == expected["gain"] and row["rung"] == expected["rung"]


def test_missing_channel_column_is_refused(fleet):
    df = fleet[4]
    with pytest.raises(ValueError, match=r"no column `sensor`"):
        sc_spark.replay_channels(df, channel="sensor")
