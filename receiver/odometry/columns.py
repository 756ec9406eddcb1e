"""One robot's samples as numpy columns: the shape every offline and batch path works on.

Owns ``Columns`` and building it fast from decoded messages (anything with
the wire fields: ``formats.protocol.Sample``). Pure numpy: no I/O.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from itertools import chain
from operator import attrgetter, itemgetter

import numpy as np

_NAN = float("nan")
_NO_POSE = (_NAN, _NAN, _NAN)


@dataclass
class Columns:
    """One robot's samples in arrival order, as arrays (NaN where a field was absent)."""

    seq: np.ndarray  # (N,) int64
    t: np.ndarray  # (N,) float, robot clock, s
    ticks: np.ndarray  # (N, n_wheels) int64
    pose: np.ndarray  # (N, 3) float, robot's own conventions
    imu: np.ndarray  # (N,) float, robot's heading unit
    loop: np.ndarray  # (N,) float, s
    reset: np.ndarray  # (N,) bool
    rx: np.ndarray = field(default=None)  # (N,) float, receiver wall clock; NaN if unknown
    # The team's own signals (the messages' "data"): name -> (N,) float, NaN
    # where a message did not carry that name; names in order of first appearance.
    signals: dict[str, np.ndarray] = field(default_factory=dict)

    def __post_init__(self) -> None:
        if self.rx is None:
            self.rx = np.full(len(self.seq), np.nan)

    def __len__(self) -> int:
        return len(self.seq)

    def take(self, index: np.ndarray) -> Columns:
        """The rows at ``index`` (an index array or a boolean mask), every column alike."""
        signals = {name: values[index] for name, values in self.signals.items()}
        return Columns(*(getattr(self, name)[index] for name in COLUMN_NAMES), signals=signals)


COLUMN_NAMES = ("seq", "t", "ticks", "pose", "imu", "loop", "reset", "rx")


def concat_columns(parts: list[Columns]) -> Columns:
    """One robot's pieces end to end, in order; a signal a piece lacks is NaN in its rows."""
    if len(parts) == 1:
        return parts[0]
    names = dict.fromkeys(chain.from_iterable(p.signals for p in parts))
    signals = {
        name: np.concatenate([p.signals[name] if name in p.signals else np.full(len(p), _NAN) for p in parts])
        for name in names
    }
    return Columns(*(np.concatenate([getattr(p, name) for p in parts]) for name in COLUMN_NAMES), signals=signals)


def columns_from_samples(
    samples: list, n_wheels: int, ticks: list | None = None, with_signals: bool | None = None
) -> Columns:
    """Columns from decoded ``protocol.Sample`` objects of one robot.

    attrgetter with np.fromiter, and chain for the nested lists, keep this at
    about a tenth of the cost of np.array over lists of lists. Optional
    fields are first read as if always present (the common case); a None
    stops np.fromiter at once and that column is read again with NaN for it.
    ``ticks`` is the samples' ticks lists when the caller already has them;
    ``with_signals`` False says that no sample carries "data" (None: look).
    """
    n = len(samples)
    if ticks is None:
        ticks = map(attrgetter("ticks"), samples)
    try:
        pose = np.fromiter(chain.from_iterable(map(attrgetter("pose"), samples)), dtype=float, count=3 * n)
    except TypeError:  # a message without a pose
        pose = np.fromiter(chain.from_iterable(p or _NO_POSE for p in map(attrgetter("pose"), samples)), dtype=float, count=3 * n)
    return Columns(
        seq=np.fromiter(map(attrgetter("seq"), samples), dtype=np.int64, count=n),
        t=np.fromiter(map(attrgetter("t"), samples), dtype=float, count=n),
        ticks=np.fromiter(chain.from_iterable(ticks), dtype=np.int64, count=n * n_wheels).reshape(n, n_wheels),
        pose=pose.reshape(n, 3),
        imu=_optional_floats(samples, "imu"),
        loop=_optional_floats(samples, "loop"),
        reset=np.fromiter(map(attrgetter("reset"), samples), dtype=bool, count=n),
        rx=_optional_floats(samples, "rx"),
        signals=_signals(samples) if with_signals or with_signals is None else {},
    )


def _signals(samples: list) -> dict[str, np.ndarray]:
    """name -> (N,) float of the samples' "data", NaN where a sample lacks the name."""
    datas = list(map(attrgetter("data"), samples))
    n = len(samples)
    first = datas[0] if n else None
    if first:
        # The common case, every message with the same names: as many names in
        # each as in the first, and each of its names found in all of them.
        try:
            if set(map(len, datas)) == {len(first)}:
                return {name: np.fromiter(map(itemgetter(name), datas), dtype=float, count=n) for name in first}
        except (TypeError, KeyError):  # a sample without data, or with other names
            pass
    present = [d for d in datas if d]
    if not present:
        return {}
    names = list(dict.fromkeys(chain.from_iterable(present)))
    empty: dict = {}
    datas = [d or empty for d in datas]
    return {name: np.fromiter((d.get(name, _NAN) for d in datas), dtype=float, count=n) for name in names}


def _optional_floats(samples: list, name: str) -> np.ndarray:
    n = len(samples)
    if n and getattr(samples[0], name) is not None:
        try:
            return np.fromiter(map(attrgetter(name), samples), dtype=float, count=n)
        except TypeError:  # absent in some message
            pass
    values = list(map(attrgetter(name), samples))
    absent = values.count(None)
    if absent == n:
        return np.full(n, _NAN)
    return np.fromiter((_NAN if v is None else v for v in values), dtype=float, count=n)
