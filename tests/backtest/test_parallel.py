"""The backtest spread over processes gives the serial answer."""

from __future__ import annotations

import numpy as np

from basiswise.optimizer.backtest.engine import run_backtest
from basiswise.optimizer.backtest.parallel import run_backtest_parallel
from basiswise.scenarios import demo_book_path


def test_two_processes_equal_serial():
    kw = dict(step=120, method="round", window=300)
    ests = ["sample", "ledoit-wolf"]
    serial = run_backtest(demo_book_path(), estimators=ests, **kw)
    par = run_backtest_parallel(str(demo_book_path()), estimators=ests, workers=2, **kw)
    assert [(r.strategy, r.estimator) for r in par.runs] == \
        [(r.strategy, r.estimator) for r in serial.runs]
    for a, b in zip(serial.runs, par.runs, strict=True):
        np.testing.assert_allclose(a.targets, b.targets, atol=1e-8)
    assert [m.variance_reduction for m in par.metrics()] == \
        [m.variance_reduction for m in serial.metrics()]
