"""Shared hypothesis strategies for tests of compositional data, and a recording comm.

Import from other test files with ``from conftest import positive_compositions``.
The ``recording_comms`` fixture gives every widget made in a test a comm that keeps what
the kernel sends (``widget.comm.sent``).

Compositions are drawn as ``exp(log-values)`` with the log-values in a bounded
range, so every part is strictly positive and ratios stay well conditioned
(largest ratio inside one row: exp(2 * LOG_BOUND) ~ 2.2e4).
"""

from __future__ import annotations

import comm
import numpy as np
import pytest
from hypothesis import HealthCheck, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp


class RecordingComm(comm.DummyComm):
    """A comm that keeps every message the kernel sends to the front end."""

    def __init__(self, *args, **kwargs):
        self.sent: list[dict] = []
        super().__init__(*args, **kwargs)

    def publish_msg(self, msg_type, data=None, metadata=None, buffers=None, **keys):
        if msg_type == "comm_msg":
            self.sent.append(data)


@pytest.fixture
def recording_comms(monkeypatch):
    """Widgets made in the test get a :class:`RecordingComm`."""
    monkeypatch.setattr(comm, "create_comm", lambda *a, **k: RecordingComm(*a, **k))


#: Log-values are drawn in [-LOG_BOUND, LOG_BOUND].
LOG_BOUND = 5.0

# Every property test of the suite: no deadline and no "too slow" health check, as CI
# shares two cores; example counts stay modest in each test instead.
settings.register_profile(
    "compwidgets", deadline=None, suppress_health_check=[HealthCheck.too_slow]
)
settings.load_profile("compwidgets")

#: Settings for property tests: modest example counts, no deadline (shared CPU).
PROPERTY_SETTINGS = settings(max_examples=60, deadline=None)

_log_values = st.floats(
    min_value=-LOG_BOUND, max_value=LOG_BOUND, allow_nan=False, allow_infinity=False
)


def compositions(n_rows: int, n_parts: int) -> st.SearchStrategy[np.ndarray]:
    """Positive matrices of exactly shape (n_rows, n_parts), not closed."""
    return hnp.arrays(np.float64, (n_rows, n_parts), elements=_log_values).map(np.exp)


@st.composite
def positive_compositions(draw, min_parts=2, max_parts=8, min_rows=2, max_rows=30) -> np.ndarray:
    """Positive matrices (n, D) with n and D drawn in the given ranges, not closed."""
    n_parts = draw(st.integers(min_parts, max_parts))
    n_rows = draw(st.integers(min_rows, max_rows))
    return draw(compositions(n_rows, n_parts))


@st.composite
def valid_sbps(draw, n_parts: int) -> np.ndarray:
    """A random valid sequential binary partition of ``n_parts`` parts, shape (D-1, D).

    Drawn by recursive random splitting: start from the group of all parts;
    at each step pick any group still holding more than one part (so rows come
    in a random order that still respects "split only groups made above"),
    shuffle it, cut it in two non-empty sides and give the sides random signs.
    """
    open_groups = [list(range(n_parts))]
    rows = []
    while open_groups:
        group = open_groups.pop(draw(st.integers(0, len(open_groups) - 1)))
        shuffled = draw(st.permutations(group))
        cut = draw(st.integers(1, len(group) - 1))
        plus, minus = shuffled[:cut], shuffled[cut:]
        if draw(st.booleans()):
            plus, minus = minus, plus
        row = np.zeros(n_parts, dtype=int)
        row[plus] = 1
        row[minus] = -1
        rows.append(row)
        open_groups.extend(side for side in (plus, minus) if len(side) > 1)
    return np.array(rows, dtype=int).reshape(n_parts - 1, n_parts)
