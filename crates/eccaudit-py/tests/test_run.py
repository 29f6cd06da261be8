"""Running in a notebook: progress reported, Ctrl-C stops a run cleanly, the GIL is free while
the core computes, figures and HTML render."""

import _thread
import io
import threading
import time

import pytest

import eccaudit
from conftest import VELKA

# Long enough to be interrupted: 13 e x 200 trials, each with a posterior run.
LONG = {"injection": {"trials_per_cell": 200}}


def test_progress_reaches_the_total():
    calls = []
    eccaudit.audit(
        VELKA,
        injection={"eccentricities": [0.0, 0.2], "trials_per_cell": 5, "posterior": {"priors": []}},
        progress=lambda done, total: calls.append((done, total)),
    )
    assert calls, "the progress callback was never called"
    # 10 base trials, then the audit's adaptive batches (circular and least-squares extras):
    # the total grows with them, and the last call reports the run complete.
    done, total = calls[-1]
    assert total >= 10 and done == total
    assert all(a[0] <= b[0] for a, b in zip(calls, calls[1:]))


def test_tqdm_bar_is_used_when_installed():
    pytest.importorskip("tqdm")
    result = eccaudit.inject(VELKA, e=[0.0], trials=3, posterior=[], progress=True)
    assert len(result.trials["trial"]) == 3


def test_ctrl_c_stops_the_run_cleanly():
    # SIGINT's Python-level effect, delivered to the main thread 0.5 s into the run.
    timer = threading.Timer(0.5, _thread.interrupt_main)
    started = time.monotonic()
    timer.start()
    with pytest.raises(KeyboardInterrupt):
        eccaudit.audit(VELKA, LONG, progress=False)
    elapsed = time.monotonic() - started
    timer.cancel()
    # The full run takes minutes; stopping means within about a second of the signal (the
    # trials in flight finish, each well under a second).
    assert elapsed < 10, elapsed
    # The module still works afterwards.
    assert eccaudit.fit(VELKA).eccentricity >= 0


def test_exception_in_the_progress_callback_stops_the_run():
    def stop(done, total):
        raise KeyboardInterrupt

    started = time.monotonic()
    with pytest.raises(KeyboardInterrupt):
        eccaudit.audit(VELKA, LONG, progress=stop)
    assert time.monotonic() - started < 10


def test_gil_is_released_while_the_core_computes():
    ticks = []
    stop = threading.Event()

    def tick():
        while not stop.is_set():
            ticks.append(time.monotonic())
            time.sleep(0.01)

    settings = {"injection": {"eccentricities": [0.0, 0.3], "trials_per_cell": 10}}
    ticker = threading.Thread(target=tick)
    ticker.start()
    started = time.monotonic()
    eccaudit.audit(VELKA, settings, threads=1, progress=False)
    ended = time.monotonic()
    stop.set()
    ticker.join()
    during = [t for t in ticks if started < t < ended]
    # With the GIL held, the ticker could not run at all during the call.
    assert ended - started > 0.2
    assert len(during) > 0.3 * (ended - started) / 0.01


def test_statement_renders_as_html_and_figures_draw():
    matplotlib = pytest.importorskip("matplotlib")
    matplotlib.use("Agg")
    result = eccaudit.audit(
        VELKA,
        injection={"eccentricities": [0.0, 0.2], "trials_per_cell": 4, "posterior": {"priors": []}},
        progress=False,
    )
    html = result._repr_html_()
    assert "Eccentricity statement" in html and "<pre" in html
    assert str(result) == result.statement
    for figure in [
        result.plot(),
        eccaudit.fit(VELKA).plot(),
        eccaudit.priors(VELKA, priors=["uniform"], walkers=20, steps=200, burn=100, progress=False).plot(),
    ]:
        buffer = io.BytesIO()
        figure.savefig(buffer, format="png")
        assert buffer.tell() > 1000
        assert figure.axes
    assert "Least-squares fit" in eccaudit.fit(VELKA)._repr_html_()


def test_trials_as_astropy_and_pandas_tables():
    result = eccaudit.inject(VELKA, e=[0.0, 0.3], trials=3, posterior=[], progress=False)
    pytest.importorskip("pandas")
    assert len(result.trials_frame()) == 6
    pytest.importorskip("astropy")
    assert result.trials_table().colnames[:3] == ["trial", "cell", "true_e"]
