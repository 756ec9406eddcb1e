"""A robot's signals over a window read through kept block summaries, against every row."""

from __future__ import annotations

import numpy as np

from dashboard.signal_blocks import drawable
from receiver.formats.protocol import Sample
from receiver.live.raw_history import RawHistory


def test_kept_rows_are_real_rows_in_order_holding_each_signals_extremes():
    rng = np.random.default_rng(4)
    raw = RawHistory()
    sent: dict[str, list[tuple[float, float]]] = {"a": [], "b": [], "c": []}
    for seq in range(6000):  # about 16,000 signal rows: full blocks, a block filling
        rx = 100.0 + 0.001 * seq
        data = {"a": float(rng.normal()), "b": float(np.sin(seq / 50.0))}
        if seq % 7 == 0:
            data["c"] = float(seq)  # a signal sent now and then
        for name, value in data.items():
            sent[name].append((rx, value))
        raw([(Sample(v=1, robot="bot", seq=seq, t=rx, ticks=[0, 0, 0], rx=rx, data=data), "test")])
    first = drawable(raw, "bot", 99.0)
    for since in (99.0, 101.234):
        found = drawable(raw, "bot", since)
        assert list(found) == ["a", "b", "c"]
        for name, (rx, values) in found.items():
            every = np.array([row for row in sent[name] if row[0] > since])
            assert np.all(np.diff(rx) > 0) and rx[0] > since
            assert set(zip(rx.tolist(), values.tolist())) <= set(map(tuple, every.tolist()))  # real rows
            assert values.max() == every[:, 1].max() and values.min() == every[:, 1].min()
            assert rx[-1] == every[-1, 0]  # the newest row: the block still filling is read whole
        assert len(found["a"][0]) < 0.5 * sum(1 for row in sent["a"] if row[0] > since)  # thinned
    # Read again, now from the summaries kept the first time: the same rows.
    again = drawable(raw, "bot", 99.0)
    assert all(np.array_equal(again[name][0], first[name][0]) for name in first)
    assert drawable(raw, "nobody", 0.0) == {}
