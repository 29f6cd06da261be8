"""Shared fixtures of the eccaudit Python tests: the repository, the command-line binary."""

import json
import os
import pathlib
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[3]
DEMO = ROOT / "demo-data"
TABLES = ROOT / "tests" / "data" / "tables"
VELKA = DEMO / "velka17-nearly-circular.csv"
CORVIN = DEMO / "corvin4-eccentric.tsv"


@pytest.fixture(scope="session")
def cli():
    """Run the eccaudit command line (ECCAUDIT_BIN, default target/release/eccaudit) and
    return its standard output parsed as JSON."""
    binary = os.environ.get("ECCAUDIT_BIN", str(ROOT / "target" / "release" / "eccaudit"))
    if not os.path.exists(binary):
        pytest.fail(f"{binary} not built: run `cargo build --release` first")

    def run(*args):
        out = subprocess.run([binary, *map(str, args)], check=True, capture_output=True, text=True)
        return json.loads(out.stdout)

    return run
