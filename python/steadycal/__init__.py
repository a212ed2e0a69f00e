"""steadycal: calibration monitoring of field sensors, over the same core a sensor board runs.

- :func:`replay` runs a feed (a CSV or Parquet path, a pandas DataFrame, a pyarrow Table)
  through the monitor exactly as ``steadycal replay`` does and returns a :class:`Run`:
  the summary dict (the CLI's summary JSON, key for key) and the events, readings and
  checks as pyarrow Tables (the rows of the CLI's files).
- :class:`Monitor` is one channel's monitor: ``push`` one sample, ``push_batch`` an Arrow
  table without a Python loop, ``snapshot``/``Monitor.restore`` (the board's snapshot
  format; ``steadycal replay --resume`` reads it), pickling through the snapshot.
- :func:`assess` is ``steadycal assess --json``: the lab run's assessment as a dict.
- :mod:`steadycal.spark` replays a fleet of channels on Apache Spark.

Bad input raises ``ValueError`` with the CLI's message (file, line, column or key).
"""

from ._native import Monitor, __version__
from ._replay import Run, assess, replay, schemas

__all__ = ["Monitor", "Run", "assess", "replay", "schemas", "__version__"]
