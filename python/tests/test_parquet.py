"""What must be shown, point 3 (Python side): each shipped scenario with seconds as time,
written as Parquet by pyarrow, replays to the CSV run's events, readings and checks, and
a pyarrow Table or pandas DataFrame replays the same (the reference is the CLI's CSV run of
this repository: what is shown is identity)."""

from __future__ import annotations

import pyarrow as pa
import pyarrow.csv as pa_csv
import pyarrow.parquet as pq
import pytest

import steadycal
from conftest import FEEDS, NUMERIC_TIME, config_of

# Summary keys that name the input rather than describe the run.
INPUT_KEYS = {"feed", "input_format", "missing", "missing_raw"}


def table_of(name):
    return pa_csv.read_csv(
        FEEDS / f"{name}.csv",
        convert_options=pa_csv.ConvertOptions(null_values=[""], column_types={"t": pa.float64(), "raw": pa.float64(), "ref": pa.float64()}),
    )


@pytest.mark.parametrize("precision", ["f32", "f64"])
@pytest.mark.parametrize("name", NUMERIC_TIME)
def test_parquet_and_tables_replay_to_the_csv_run(tmp_path, name, precision):
    config = config_of(name)
    temp = "temp" if name == "load-cell" else None
    csv_run = steadycal.replay(str(FEEDS / f"{name}.csv"), config=config, precision=precision, temp=temp)
    table = table_of(name)
    pq.write_table(table, tmp_path / f"{name}.parquet", row_group_size=4096)
    sources = [str(tmp_path / f"{name}.parquet"), table]
    if name != "flow-meter-dropout":
        # pandas stores a missing value as NaN, and Arrow reads a NaN of pandas as null
        # (missing): its NaN samples are no samples there, not rejected ones.
        sources.append(table.to_pandas())
    for source in sources:
        run = steadycal.replay(source, config=config, precision=precision, temp=temp)
        assert run.events.equals(csv_run.events)
        assert run.readings.to_pandas().equals(csv_run.readings.to_pandas())
        assert run.checks.to_pandas().equals(csv_run.checks.to_pandas())
        strip = lambda s: {k: v for k, v in s.items() if k not in INPUT_KEYS}
        assert strip(run.summary) == strip(csv_run.summary)
