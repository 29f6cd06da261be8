"""The Python package gives the command line's numbers: same JSON for fit, priors, inject and
audit on the demo tables, the same trial rows, whatever the thread count."""

import csv
import json

import numpy as np
import pytest

import eccaudit
from conftest import CORVIN, VELKA


@pytest.mark.parametrize("path", [VELKA, CORVIN], ids=["velka17", "corvin4"])
def test_fit_equals_cli_json(cli, path):
    assert eccaudit.fit(path).to_dict() == cli("fit", path, "--json")


def test_fit_settings_map_onto_the_cli_flags(cli):
    py = eccaudit.fit(VELKA, jitter="fit", min_period=2, max_period=50, peaks=2, seed=4)
    assert py.to_dict() == cli(
        "fit", VELKA, "--json", "--jitter", "fit", "--min-period", "2", "--max-period", "50",
        "--peaks", "2", "--seed", "4",
    )


def test_priors_equal_cli_json_and_chains_have_the_stated_shape(cli):
    settings = dict(priors=["uniform", "kipping2013"], walkers=20, steps=300, burn=100, seed=3)
    py = eccaudit.priors(VELKA, threads=2, progress=False, **settings)
    expected = cli(
        "priors", VELKA, "--json", "--priors", "uniform", "kipping2013",
        "--walkers", "20", "--steps", "300", "--burn", "100", "--seed", "3",
    )
    assert py.to_dict() == expected
    assert len(py.samples) == 2
    first = py.samples[0]
    # Runs extend themselves until the ensemble convergence rule holds (issue 13): at least the
    # 300 stored steps asked for, from independent ensembles of 20 walkers each.
    n_steps, n_walkers, n_params = first["samples"].shape
    assert n_params == len(first["names"])
    assert n_steps >= 300
    assert n_walkers >= 20 and n_walkers % 20 == 0
    assert first["log_density"].shape == (n_steps, n_walkers)
    assert np.all(np.isfinite(first["samples"]))


def _read_trials_csv(path):
    with open(path, newline="") as handle:
        rows = [row for row in csv.reader(line for line in handle if not line.startswith("#"))]
    return rows[0], rows[1:]


def _assert_trials_equal(py_trials, header, rows):
    assert list(py_trials) == header
    for j, name in enumerate(header):
        column = [row[j] for row in rows]
        if name.endswith("_status"):
            assert list(py_trials[name]) == column
        else:
            expected = np.array([float(v) if v else np.nan for v in column])
            np.testing.assert_array_equal(py_trials[name], expected)


def test_inject_equals_cli_json_and_trials(cli, tmp_path):
    out = tmp_path / "grid"
    expected = cli(
        "inject", CORVIN, "--e", "0,0.3", "--trials", "6", "--no-posterior", "--seed", "9",
        "--json", "--quiet", "--out", out,
    )
    py = eccaudit.inject(CORVIN, e=[0, 0.3], trials=6, posterior=[], seed=9, progress=False)
    assert py.to_dict() == expected
    _assert_trials_equal(py.trials, *_read_trials_csv(out / "trials.csv"))


def test_audit_replay_equals_cli_json_trials_and_statement(cli, tmp_path):
    settings = eccaudit.default_audit_settings()
    settings["injection"]["eccentricities"] = [0.0, 0.1, 0.3]
    settings["injection"]["trials_per_cell"] = 6
    settings["injection"]["posterior"].update(n_walkers=16, n_steps=200, n_burn=100)
    settings["seed"] = 5
    path = tmp_path / "settings.json"
    path.write_text(json.dumps(settings))
    out = tmp_path / "audit"
    expected = cli("audit", VELKA, "--settings", path, "--json", "--quiet", "--out", out)

    one = eccaudit.audit(VELKA, settings=path, threads=1, progress=False)
    two = eccaudit.audit(VELKA, settings=settings, threads=2, progress=False)
    assert one.to_dict() == expected
    assert two.to_dict() == expected
    assert one.statement == (out / "statement.txt").read_text()
    _assert_trials_equal(two.trials, *_read_trials_csv(out / "trials.csv"))
    # The settings used are a replay file the command line accepts.
    replay = tmp_path / "replay.json"
    two.save_settings(replay)
    assert cli("audit", VELKA, "--settings", replay, "--json", "--quiet", "--out", tmp_path / "r") == expected


def test_audit_keywords_merge_into_the_settings():
    settings = {"injection": {"eccentricities": [0.0, 0.2], "trials_per_cell": 4}}
    a = eccaudit.audit(VELKA, settings, injection={"posterior": {"priors": []}}, seed=2, progress=False)
    b = eccaudit.audit(
        VELKA,
        injection={"eccentricities": [0.0, 0.2], "trials_per_cell": 4, "posterior": {"priors": []}},
        seed=2,
        progress=False,
    )
    assert a.to_dict() == b.to_dict()
    assert a.settings["seed"] == 2
    assert a.settings["injection"]["trials_per_cell"] == 4
    assert a.to_dict()["trials_total"] == 8


def test_unknown_setting_is_an_error():
    with pytest.raises(ValueError, match="unknown field"):
        eccaudit.audit(VELKA, injection={"trials": 4}, progress=False)
    with pytest.raises(ValueError, match="unknown field"):
        eccaudit.fit(VELKA, companion=2)
