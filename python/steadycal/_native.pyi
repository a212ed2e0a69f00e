"""Type stubs of the extension module (built from python/src)."""

from os import PathLike
from typing import Any, Dict, List, Mapping, Optional, Tuple, Union

import pyarrow as pa

__version__: str

Config = Union[None, str, PathLike[str], Mapping[str, Any]]

class Monitor:
    """One channel's calibration monitor: the core's monitor with the engine's event counts."""

    def __init__(self, config: Config = None, precision: str = "f32") -> None:
        """A fresh monitor; `config` is a TOML file path or a dict of its sections.

        Raises ValueError naming the key (and line and column for a file) for a bad value."""
    @property
    def precision(self) -> str:
        """"f32" or "f64"."""
    @property
    def samples(self) -> int:
        """Samples pushed so far (the next sample's seq), counting those before a snapshot."""
    @property
    def rung(self) -> str:
        """The active rung."""
    def push(self, t: float, raw: float, ref: Optional[float] = None, temp: Optional[float] = None) -> Dict[str, Any]:
        """One sample: {"seq", "reading" (value, standard_uncertainty, expanded_uncertainty,
        rung; None for a check), "flags", "events" (as the CLI's event lines)}."""
    def push_batch(
        self, table: Any, *, time: str = "t", raw: str = "raw", ref: str = "ref", temp: str = "temp"
    ) -> Tuple[pa.Table, pa.Table]:
        """Every row of a pyarrow Table or RecordBatch (or an object with
        __arrow_c_stream__), without a Python loop: (events, readings) as pyarrow Tables
        with the columns of the CLI's --events and --readings."""
    def snapshot(self) -> bytes:
        """The monitor's whole state in the snapshot format (`replay --resume` reads it)."""
    @staticmethod
    def restore(data: bytes) -> "Monitor":
        """A monitor from snapshot bytes; ValueError naming the byte for a damaged one."""
    def summary(self) -> Dict[str, Any]:
        """The engine's part of the CLI's summary document."""
    def __reduce__(self) -> Tuple[Any, Tuple[bytes]]: ...

def _restore_monitor(data: bytes) -> Monitor: ...
def replay_command(argv: List[str]) -> None: ...
def replay_arrow(source: Any, argv: List[str]) -> None: ...
def assess_command(argv: List[str]) -> None: ...
def fleet_row(name: str, summary_json: str) -> str: ...
def config_text(json: str) -> str: ...
def schemas(precision: str = "f32") -> Dict[str, pa.Schema]: ...
