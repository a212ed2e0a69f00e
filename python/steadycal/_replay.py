"""replay and assess: the CLI's commands run in-process, their files read as Arrow tables."""

from __future__ import annotations

import html
import json
import os
import tempfile
from typing import Any, Dict, List, Mapping, Optional, Union

import pyarrow as pa
import pyarrow.csv as pa_csv
import pyarrow.json as pa_json

from . import _native

PathLike = Union[str, "os.PathLike[str]"]

_COLUMN_DEFAULTS = {"time": "t", "raw": "raw", "ref": "ref"}
_COLUMN_OPTIONS = {"time": "time-column", "raw": "raw-column", "ref": "ref-column", "temp": "temp-column"}


def schemas(precision: str = "f32") -> Dict[str, pa.Schema]:
    """The pyarrow schemas of a run's ``events``, ``readings`` and ``checks`` tables."""
    return dict(_native.schemas(precision))


def _flags(options: Mapping[str, Any]) -> List[str]:
    """Keyword options as the CLI's: ``skip_bad_rows=True`` is ``--skip-bad-rows``,
    ``missing=["-200", "NA"]`` repeats ``--missing=...``, ``False``/``None`` leave it out."""
    argv: List[str] = []
    for key, value in options.items():
        flag = "--" + key.replace("_", "-")
        if value is None or value is False:
            continue
        if value is True:
            argv.append(flag)
        elif isinstance(value, (list, tuple)):
            argv.extend(f"{flag}={item}" for item in value)
        else:
            argv.append(f"{flag}={os.fspath(value) if isinstance(value, os.PathLike) else value}")
    return argv


def _config_args(config: Any, workdir: str) -> List[str]:
    if config is None:
        return []
    if isinstance(config, Mapping):
        path = os.path.join(workdir, "config.toml")
        with open(path, "w", encoding="utf-8") as out:
            out.write(_native.config_text(json.dumps(config)))
        return [f"--config={path}"]
    return [f"--config={os.fspath(config)}"]


def _column_args(columns: Mapping[str, Optional[str]]) -> List[str]:
    argv = []
    for key, name in columns.items():
        if name is not None and name != _COLUMN_DEFAULTS.get(key):
            argv.append(f"--{_COLUMN_OPTIONS[key]}={name}")
    return argv


def _arrow_source(source: Any) -> Any:
    """A pandas DataFrame as a pyarrow Table; Arrow objects as they are; None for a path."""
    if isinstance(source, (str, os.PathLike)):
        return None
    if isinstance(source, pa.RecordBatch):
        return pa.Table.from_batches([source])
    if hasattr(source, "__arrow_c_stream__"):
        return source
    try:
        import pandas as pd
    except ImportError:  # pragma: no cover - pandas is optional
        pd = None
    if pd is not None and isinstance(source, pd.DataFrame):
        return pa.Table.from_pandas(source, preserve_index=False)
    raise TypeError(
        f"source: expected a path, a pandas DataFrame or a pyarrow Table, found {type(source).__name__}"
    )


def _clean(error: ValueError, workdir: str) -> ValueError:
    """The message without the temporary directory's path (a dict config is `config.toml`)."""
    return ValueError(str(error).replace(workdir + os.sep, ""))


def _read_events(path: str, schema: pa.Schema) -> pa.Table:
    if os.path.getsize(path) == 0:
        return schema.empty_table()
    table = pa_json.read_json(
        path,
        parse_options=pa_json.ParseOptions(explicit_schema=schema, unexpected_field_behavior="error"),
    )
    return table.select(schema.names).cast(schema)


def _read_csv(path: str, schema: pa.Schema) -> pa.Table:
    table = pa_csv.read_csv(
        path,
        convert_options=pa_csv.ConvertOptions(
            column_types={f.name: f.type for f in schema},
            null_values=[""],
            strings_can_be_null=False,
            quoted_strings_can_be_null=False,
        ),
    )
    return table.select(schema.names).cast(schema)


class Run:
    """The outcome of :func:`replay`.

    Attributes:
        summary: the summary document, identical key for key to ``--summary``'s JSON.
        events: one row per event (``seq``, ``t``, ``kind``, then every event field; a
            field the event's kind lacks is null), the lines of ``--events``.
        readings: one row per sample without reference, the rows of ``--readings``.
        checks: one row per fitted check, the rows of ``--checks``.
        precision: ``"f32"`` or ``"f64"``.
    """

    def __init__(self, summary: Dict[str, Any], events: pa.Table, readings: pa.Table, checks: pa.Table, precision: str):
        self.summary = summary
        self.events = events
        self.readings = readings
        self.checks = checks
        self.precision = precision

    def fleet_row(self, name: str) -> Dict[str, Any]:
        """The row ``steadycal fleet`` makes of this run, ``file`` holding ``name``."""
        return json.loads(_native.fleet_row(name, json.dumps(self.summary)))

    def __repr__(self) -> str:
        s = self.summary
        return (
            f"Run(feed={s.get('feed')!r}, samples={s.get('samples')}, checks={s.get('checks')}, "
            f"rung={s.get('rung')!r}, events={self.events.num_rows})"
        )

    def _repr_html_(self) -> str:
        s = self.summary
        rows = [
            ("feed", s.get("feed")),
            ("precision", s.get("precision")),
            ("samples", s.get("samples")),
            ("checks", s.get("checks")),
            ("rung", s.get("rung")),
            ("spread exponent", s.get("spread_exponent")),
            ("gain", (s.get("params") or {}).get("gain")),
            ("offset", (s.get("params") or {}).get("offset")),
            ("events", ", ".join(f"{k} {v}" for k, v in sorted((s.get("events") or {}).items()) if v)),
            ("raised", s.get("raised")),
            ("stopped at", s.get("stopped_at")),
        ]
        cells = "".join(
            f"<tr><th style='text-align:left'>{html.escape(str(k))}</th><td>{html.escape(str(v))}</td></tr>"
            for k, v in rows
        )
        return f"<table><caption>steadycal run</caption>{cells}</table>"


def replay(
    source: Any,
    *,
    config: Any = None,
    precision: str = "f32",
    time: str = "t",
    raw: str = "raw",
    ref: str = "ref",
    temp: Optional[str] = None,
    **feed_options: Any,
) -> Run:
    """Replays a feed exactly as ``steadycal replay`` does.

    Args:
        source: a CSV or Parquet path, a pandas DataFrame or a pyarrow Table (or any
            object with ``__arrow_c_stream__``).
        config: a monitor configuration file (path) or a dict of its sections.
        precision: ``"f32"`` (a Cortex-M4F board's) or ``"f64"``.
        time, raw, ref, temp: column names (a configuration's ``[columns]`` applies while
            they keep their defaults).
        feed_options: any other ``replay`` option by its name with ``_`` for ``-``:
            ``separator=";"``, ``decimal_comma=True``, ``missing=["-200"]``,
            ``time_format="%d/%m/%Y %H:%M:%S"``, ``timezone="Europe/Rome"``,
            ``skip_bad_rows=True``, ``resume="state.bin"``, ``save_snapshot=...``,
            ``level_low=...``, ``level_high=...``.

    Raises:
        ValueError: bad input, with the CLI's message (file, line, column or key); for a
            feed that stopped at a bad row, ``error.run`` holds the outputs up to it.
    """
    columns = {"time": time, "raw": raw, "ref": ref, "temp": temp}
    return _replay(source, ("events", "readings", "checks"), config, precision, columns, feed_options)


_FILES = {"events": "events.jsonl", "readings": "readings.csv", "checks": "checks.csv"}


def _replay(source, outputs, config, precision, columns, feed_options) -> Run:
    """The replay writing only `outputs` (the other tables are left empty)."""
    arrow = _arrow_source(source)
    with tempfile.TemporaryDirectory(prefix="steadycal-") as workdir:
        paths = {name: os.path.join(workdir, file) for name, file in _FILES.items()}
        summary_path = os.path.join(workdir, "summary.json")
        argv = [f"--{name}={paths[name]}" for name in outputs]
        argv += [f"--summary={summary_path}", f"--precision={precision}", "--quiet"]
        try:
            argv += _config_args(config, workdir)
            argv += _column_args(columns)
            argv += _flags(feed_options)
            if arrow is None:
                _native.replay_command([os.fspath(source)] + argv)
            elif hasattr(_native, "replay_arrow"):
                _native.replay_arrow(arrow, _arrow_name(source), argv)
            else:
                raise TypeError("this build replays paths only; in-memory tables need the Arrow reader of steadycal-cli")
        except ValueError as error:
            raise _clean(error, workdir) from None
        with open(summary_path, encoding="utf-8") as f:
            summary = json.load(f)
        tables = schemas(precision)
        read = {"events": _read_events, "readings": _read_csv, "checks": _read_csv}
        got = {
            name: read[name](paths[name], tables[name]) if name in outputs else tables[name].empty_table()
            for name in _FILES
        }
        run = Run(summary, got["events"], got["readings"], got["checks"], precision)
    if summary.get("stopped_at"):
        error = ValueError(summary["stopped_at"])
        error.run = run  # type: ignore[attr-defined]
        raise error
    return run


def _arrow_name(source: Any) -> str:
    """The name an in-memory source goes by in messages and in the summary's `feed`."""
    return "(DataFrame)" if type(source).__name__ == "DataFrame" else "(table)"


def assess(source: PathLike, *, config: Any = None, **options: Any) -> Dict[str, Any]:
    """Assesses a lab calibration run: the document ``steadycal assess --json`` writes.

    Args:
        source: the lab run (CSV).
        config: a monitor configuration (path or dict): its ``[acceptance]`` criteria are
            judged, its ``range.origin`` is the level origin.
        options: any other ``assess`` option by its name with ``_`` for ``-``:
            ``weights="ref^-1"``, ``basis="quadratic"``, ``raw_column="counts"``,
            ``missing=["-200"]``, ``coverage_factor=2``, ``commission="out.toml"``.

    Raises:
        ValueError: bad input, with the CLI's message.
    """
    with tempfile.TemporaryDirectory(prefix="steadycal-") as workdir:
        out = os.path.join(workdir, "assess.json")
        try:
            argv = [os.fspath(source), "--json", f"--out={out}"] + _config_args(config, workdir) + _flags(options)
            _native.assess_command(argv)
        except ValueError as error:
            raise _clean(error, workdir) from None
        with open(out, encoding="utf-8") as f:
            return json.load(f)
