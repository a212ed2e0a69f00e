"""What must be shown, point 5: bad input through Python raises ValueError with the CLI's
message: a wrong column name, a non-numeric column, a corrupt snapshot (and a bad row, a
bad configuration key)."""

from __future__ import annotations

import pyarrow as pa
import pytest

import steadycal
from conftest import FEEDS


def test_wrong_column_name_in_a_csv(cli):
    feed = FEEDS / "gas-cell.csv"
    expected = cli("replay", feed, "--raw-column", "counts", "--quiet", check=False).stderr
    with pytest.raises(ValueError) as error:
        steadycal.replay(str(feed), raw="counts")
    assert f"steadycal: {error.value}" == expected.strip()
    assert "counts" in str(error.value)


def test_wrong_column_name_in_a_table():
    table = pa.table({"t": [0.0, 1.0], "reading": [1.0, 2.0]})
    with pytest.raises(ValueError, match=r"no column `raw` \(the table has `t`, `reading`\)"):
        steadycal.Monitor().push_batch(table)


def test_non_numeric_cell_in_a_csv(cli, tmp_path):
    feed = tmp_path / "feed.csv"
    feed.write_text("t,raw,ref\n0,1.5,1\n1,high,\n")
    expected = cli("replay", feed, "--quiet", check=False).stderr.splitlines()[0]
    with pytest.raises(ValueError) as error:
        steadycal.replay(str(feed))
    assert f"steadycal: {error.value}" == expected
    assert ":3:" in str(error.value)
    # The outputs up to the bad row come with the error.
    assert error.value.run.summary["samples"] == 1


def test_non_numeric_column_in_a_table():
    table = pa.table({"t": [0.0, 1.0], "raw": ["1.0", "2.0"]})
    with pytest.raises(ValueError, match=r"column `raw`: expected numbers, found Utf8"):
        steadycal.Monitor().push_batch(table)


def test_null_raw_names_the_row():
    table = pa.table({"t": [0.0, 1.0, 2.0], "raw": [1.0, None, 2.0]})
    with pytest.raises(ValueError, match=r"row 1: column `raw`: expected a number, found null"):
        steadycal.Monitor().push_batch(table)


@pytest.mark.parametrize(
    "data, message",
    [
        (b"garbage", r"^snapshot: byte 7: shorter than a snapshot header \(7 bytes, expected at least 14 for a header\)$"),
        (b"not a snapshot at all", r"^snapshot: byte 0: not a steadycal snapshot \(wrong magic\) \(found \[6e, 6f, 74, 20\]"),
    ],
)
def test_corrupt_snapshot(data, message):
    with pytest.raises(ValueError, match=message):
        steadycal.Monitor.restore(data)


def test_flipped_byte_in_a_snapshot_fails_its_crc(cli, tmp_path):
    monitor = steadycal.Monitor()
    monitor.push(0.0, 1.0, 1.0)
    data = bytearray(monitor.snapshot())
    data[20] ^= 0xFF
    (tmp_path / "bad.bin").write_bytes(bytes(data))
    expected = cli("snapshot", "inspect", tmp_path / "bad.bin", check=False).stderr.strip()
    with pytest.raises(ValueError) as error:
        steadycal.Monitor.restore(bytes(data))
    assert "CRC-32" in str(error.value)
    # The CLI names the file where Python names the bytes: the rest is the same message.
    assert expected.endswith(str(error.value).removeprefix("snapshot"))


def test_bad_config_key_names_the_key():
    with pytest.raises(ValueError, match=r"range"):
        steadycal.Monitor(config={"range": {"low": -5.0}})


def test_unknown_option_is_refused():
    with pytest.raises(ValueError, match=r"unexpected argument '--no-such-option'"):
        steadycal.replay(str(FEEDS / "gas-cell.csv"), no_such_option=1)


def test_bad_precision():
    with pytest.raises(ValueError, match=r'precision: expected "f32" or "f64", found "f16"'):
        steadycal.Monitor(precision="f16")
