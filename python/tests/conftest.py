"""Shared fixtures: the repository, the CLI built from it, the shipped scenarios, and a real
local Spark session (started once per test session, stopped at the end)."""

from __future__ import annotations

import json
import os
import sys
import shutil
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
FEEDS = ROOT / "simulated-feeds"
# Every shipped scenario feed (absorbance-rfc3339's time column is RFC 3339 text).
SCENARIOS = sorted(p.stem for p in FEEDS.glob("*.csv"))
# The scenarios whose time column is seconds (used where a DataFrame carries the time).
NUMERIC_TIME = [name for name in SCENARIOS if name != "absorbance-rfc3339"]


def cli_path() -> Path:
    path = Path(os.environ.get("STEADYCAL_BIN", ROOT / "target" / "release" / "steadycal"))
    if not path.exists():
        subprocess.run(
            ["cargo", "build", "--release", "--bin", "steadycal"], cwd=ROOT, check=True
        )
    return path


@pytest.fixture(scope="session")
def cli():
    """Runs the `steadycal` binary of this repository; returns the completed process."""
    binary = cli_path()

    def run(*args, check=True):
        return subprocess.run(
            [str(binary), *map(str, args)], capture_output=True, text=True, check=check
        )

    return run


def config_of(name: str):
    path = FEEDS / f"{name}.monitor.toml"
    return path if path.exists() else None


def read_jsonl(path: Path):
    with open(path, encoding="utf-8") as f:
        return [json.loads(line) for line in f if line.strip()]


@pytest.fixture(scope="session")
def spark():
    """A real SparkSession in local[2] mode (Java 17, pyspark from the package registry)."""
    if shutil.which("java") is None:
        pytest.fail("java is not installed (CI installs openjdk-17-jre-headless)")
    from pyspark.sql import SparkSession

    # The workers run this interpreter (the one steadycal is installed in).
    os.environ.setdefault("PYSPARK_PYTHON", sys.executable)

    session = (
        SparkSession.builder.master("local[2]")
        .appName("steadycal-tests")
        .config("spark.sql.shuffle.partitions", "4")
        .config("spark.ui.enabled", "false")
        .config("spark.sql.execution.arrow.pyspark.enabled", "true")
        .config("spark.driver.memory", "1g")
        .getOrCreate()
    )
    session.sparkContext.setLogLevel("ERROR")
    yield session
    session.stop()
