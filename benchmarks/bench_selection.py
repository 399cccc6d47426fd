"""Cost of one selection change with two linked ternary views (a script; prints figures only).

Run:  .venv/bin/python benchmarks/bench_selection.py [--rows 1000000] [--repeat 5]

1. Kernel time of ``model.select(rows)`` for 10 % of the rows of a large
   model with two ternary views attached (density mode), until every view's
   traits are updated (observers run synchronously, so this is the duration
   of the call). Reported as a ratio to one ``numpy.histogram2d`` of the same
   projected points on the same grid, measured in the same run.
2. Bytes sent to the front end for one selection change, at 2,000 rows
   (points mode) and at the large size (density mode): every comm message is
   recorded by wrapping ``ipywidgets.Widget._send`` and ``comm.create_comm``
   (a widget made during the change, such as a new density picture, sends
   its whole state when its comm opens): length of the JSON text plus the
   binary buffers.

Data: the invented demo survey (``compwidgets.demo.stream_sediments_clean``),
major oxides only, read with ``read_composition``.
"""

from __future__ import annotations

import argparse
import json
import statistics
import time

import comm
import ipywidgets as widgets
import numpy as np

from compwidgets.core import ternary as core_ternary
from compwidgets.demo import stream_sediments_clean
from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views.ternary import TernaryView

VIEW_PARTS = (["SiO2", "Al2O3", "CaO"], ["MgO", "Fe2O3", "K2O"])


def build_model(n: int, seed: int = 7) -> CompositionModel:
    df = stream_sediments_clean(n, seed)
    majors = [c for c in df.columns if str(c).endswith("(wt%)")]
    comp = read_composition(df, parts=majors, check_total=False)
    return CompositionModel(comp, group_column="catchment")


class Recorder:
    """Counts the bytes of every comm message sent while active."""

    def __init__(self):
        self.messages = 0
        self.json_bytes = 0
        self.buffer_bytes = 0
        self.by_trait: dict[str, int] = {}
        self._original = None

    def __enter__(self):
        self._original = widgets.Widget._send
        self._original_create = comm.create_comm
        original, original_create = self._original, self._original_create

        def create(**kwargs):
            # a new widget (e.g. the density picture) opens a comm with its whole state
            self._count(kwargs.get("data", {}), kwargs.get("buffers"))
            return original_create(**kwargs)

        def send(widget, msg, buffers=None):
            self._count(msg, buffers)
            return original(widget, msg, buffers)

        comm.create_comm = create
        widgets.Widget._send = send
        return self

    def _count(self, msg, buffers) -> None:
        text = json.dumps(msg, default=str)
        size = sum(memoryview(b).nbytes for b in (buffers or []))
        self.messages += 1
        self.json_bytes += len(text.encode())
        self.buffer_bytes += size
        if msg.get("method") == "custom":  # e.g. the page speed-ups' one message of all marks
            kind = f"custom:{msg.get('content', {}).get('kind', '?')}"
            self.by_trait[kind] = self.by_trait.get(kind, 0) + size
            return
        paths = msg.get("buffer_paths", [])
        for key in {*msg.get("state", {}), *(p[0] for p in paths)}:
            share = sum(
                memoryview(buf).nbytes
                for p, buf in zip(paths, buffers or [], strict=False)
                if p[0] == key
            )
            self.by_trait[key] = self.by_trait.get(key, 0) + share

    def __exit__(self, *exc):
        widgets.Widget._send = self._original
        comm.create_comm = self._original_create

    @property
    def total(self) -> int:
        return self.json_bytes + self.buffer_bytes


def median_time(func, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        func()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def selection_pair(n: int, fraction: float, seed: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    k = int(n * fraction)
    a = np.sort(rng.choice(n, size=k, replace=False))
    b = np.sort(rng.choice(n, size=k, replace=False))
    return a, b


def bench_time(n: int, repeat: int) -> None:
    print(f"== 1. selection of 10 % of {n:,} rows, two ternary views (density mode)")
    t0 = time.perf_counter()
    model = build_model(n)
    t_model = time.perf_counter() - t0
    t0 = time.perf_counter()
    views = [TernaryView(model, parts, mode="density") for parts in VIEW_PARTS]
    t_views = time.perf_counter() - t0
    print(f"   setup: model {t_model:.2f} s, two views {t_views:.2f} s (not part of the ratio)")
    assert all(v.active_mode == "density" for v in views)

    a, b = selection_pair(model.n_rows, 0.10, seed=1)
    state = {"next": a}

    def one_selection():
        rows = state["next"]
        model.select(rows)
        state["next"] = b if rows is a else a

    one_selection()  # warm-up (caches, first render)
    t_select = median_time(one_selection, repeat)

    closed = np.asarray(model.closed(VIEW_PARTS[0]))[views[0].rows]
    x, y = core_ternary.ternary_to_xy(closed)
    ex = views[0]._density_image.extent
    bins = views[0]._density_image.bins
    rng_ = [[ex[0], ex[1]], [ex[2], ex[3]]]
    t_hist = median_time(lambda: np.histogram2d(x, y, bins=bins, range=rng_), repeat)

    t_view = median_time(views[0]._apply_selection, repeat)
    print(f"   model.select -> both views updated: {1e3 * t_select:8.1f} ms (median of {repeat})")
    print(f"   one view's update alone:            {1e3 * t_view:8.1f} ms")
    print(f"   baseline np.histogram2d, {x.size:,} pts: {1e3 * t_hist:8.1f} ms")
    print(f"   ratio select / histogram2d:         {t_select / t_hist:8.2f}")
    for v in views:
        v.close()


def bench_bytes(n: int) -> None:
    print("== 2. bytes sent to the front end for one selection change (two views)")
    for rows, label in ((2_000, "points"), (n, "density")):
        model = build_model(rows)
        views = [TernaryView(model, parts) for parts in VIEW_PARTS]
        modes = {v.active_mode for v in views}
        assert modes == {label}, modes
        a, _ = selection_pair(model.n_rows, 0.10, seed=2)
        with Recorder() as rec:
            model.select(a)
        coords = sum(2 * 4 * v.scatter.x.size for v in views)  # what resending x/y would cost
        traits = ", ".join(f"{k} {v:,}" for k, v in sorted(rec.by_trait.items()) if v)
        print(
            f"   {rows:>9,} rows ({label:7s}): {rec.messages} messages, {rec.total:,} bytes "
            f"(JSON {rec.json_bytes:,}, buffers {rec.buffer_bytes:,}); buffers by trait: {traits}"
        )
        shown = sum(v.rows.size for v in views)
        print(
            f"   {'':>9}       for scale: float32 x and y of the marks = {coords:,} bytes; "
            f"of every shown row = {8 * shown:,} bytes"
        )
        for v in views:
            v.close()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    bench_time(args.rows, args.repeat)
    bench_bytes(args.rows)


if __name__ == "__main__":
    main()
