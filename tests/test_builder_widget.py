"""Kernel side of the balance builder: what the front end sends is checked here.

The front end's messages are replayed as ipywidgets delivers them
(``Widget.set_state`` for a state update, ``_handle_custom_msg`` for a custom
message); what the kernel sends back is recorded by a comm that keeps its
messages. The data are invented (seeded log-normal numbers).

Balances are recomputed here from their published definition (Egozcue &
Pawlowsky-Glahn 2005, Balances: a new perspective for compositional data
analysis): ``b = sqrt(r s / (r + s)) * ln(g(x_num) / g(x_den))`` with ``g`` the
geometric mean; the clr is ``ln x - mean(ln x)`` per row (Aitchison 1986); the
total variance is the sum of the clr variances (Aitchison 1986). Variances use
ddof = 1 and quantiles numpy's default linear interpolation, as documented in
compwidgets.core.summary.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from compwidgets import core
from compwidgets.core import principal
from compwidgets.core.tree import sbp_to_tree, validate_tree
from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views._common import group_colours
from compwidgets.views.builder import BalanceBuilder

HTML_PART = "<img src=x onerror=alert(1)>"
PARTS = ["Aa", "Bb", "Cc", "Dd", HTML_PART]
N = 60


pytestmark = pytest.mark.usefixtures("recording_comms")


def _values() -> np.ndarray:
    return np.random.default_rng(20240611).lognormal(mean=1.0, sigma=0.7, size=(N, len(PARTS)))


def _frame() -> pd.DataFrame:
    rng = np.random.default_rng(5)
    df = pd.DataFrame(_values(), columns=PARTS)
    df["site"] = rng.choice(["north", "south"], N)
    df["batch"] = rng.choice(["b1", "b2", "b3"], N)
    return df


@pytest.fixture
def model() -> CompositionModel:
    comp = read_composition(_frame(), parts=PARTS, check_total=False)
    return CompositionModel(comp, group_column="site")


@pytest.fixture
def builder(model):
    b = BalanceBuilder(model)
    yield b
    b.close()


def leaf(node_id, parts):
    return {"id": node_id, "parts": list(parts), "name": "", "children": []}


def split(node_id, parts, num, den, name=""):
    return {"id": node_id, "parts": list(parts), "name": name, "children": [num, den]}


def first_split() -> dict:
    """{Aa, Bb} | {Cc, Dd, X}."""
    return split("n0", PARTS, leaf("n1", PARTS[:2]), leaf("n2", PARTS[2:]))


def two_splits() -> dict:
    """{Aa, Bb} | {Cc, Dd, X}, then {Cc} | {Dd, X}."""
    return split(
        "n0",
        PARTS,
        leaf("n1", PARTS[:2]),
        split("n2", PARTS[2:], leaf("n3", ["Cc"]), leaf("n4", ["Dd", HTML_PART])),
    )


def complete_tree() -> dict:
    return split(
        "n0",
        PARTS,
        split("n1", PARTS[:2], leaf("n5", ["Aa"]), leaf("n6", ["Bb"])),
        split(
            "n2",
            PARTS[2:],
            leaf("n3", ["Cc"]),
            split("n4", ["Dd", HTML_PART], leaf("n7", ["Dd"]), leaf("n8", [HTML_PART])),
        ),
    )


def from_front_end(widget, **state):
    """Deliver a state update as ipywidgets does for a front-end message (fresh JSON)."""
    widget.set_state(json.loads(json.dumps(state)))


def sent_states(widget) -> list[dict]:
    return [m["state"] for m in widget.comm.sent if m.get("method") == "update"]


def balance_by_definition(X: np.ndarray, num: list[str], den: list[str]) -> np.ndarray:
    """Egozcue & Pawlowsky-Glahn (2005): sqrt(rs/(r+s)) ln(g(num)/g(den))."""
    logs = np.log(X)
    i = [PARTS.index(p) for p in num]
    j = [PARTS.index(p) for p in den]
    r, s = len(i), len(j)
    return np.sqrt(r * s / (r + s)) * (logs[:, i].mean(axis=1) - logs[:, j].mean(axis=1))


def total_variance_by_definition(X: np.ndarray) -> float:
    """Aitchison (1986): trace of the clr covariance (ddof = 1)."""
    logs = np.log(X)
    clr = logs - logs.mean(axis=1, keepdims=True)
    return float(np.var(clr, axis=0, ddof=1).sum())


# --------------------------------------------------------------------------- initial state


def test_starts_as_one_group_of_all_parts(builder, model):
    assert builder.parts == PARTS
    assert builder.tree == leaf("n0", PARTS)
    assert model.sbp is None
    assert builder.stats == []
    assert builder.n_samples == N
    assert builder.total_variance == pytest.approx(total_variance_by_definition(_values()))
    assert builder.groups == [
        {"code": 0, "name": "north", "colour": group_colours(["north", "south"])[0]},
        {"code": 1, "name": "south", "colour": group_colours(["north", "south"])[1]},
    ]
    assert builder.messages == ""


def test_needs_a_model():
    with pytest.raises(TypeError, match="CompositionModel"):
        BalanceBuilder("not a model")


# --------------------------------------------------------------------------- refused trees


def _bad_trees():
    base = PARTS
    yield (
        "duplicate part",
        split("n0", base, leaf("n1", ["Aa", "Bb", "Aa"]), leaf("n2", base[2:])),
        "twice",
    )
    yield (
        "missing part",
        split("n0", base[:4], leaf("n1", base[:2]), leaf("n2", base[2:4])),
        "missing",
    )
    yield (
        "unknown part",
        split("n0", [*base, "Zz"], leaf("n1", base[:2]), leaf("n2", [*base[2:], "Zz"])),
        "unknown",
    )
    yield (
        "one part split",
        split(
            "n0",
            base,
            split("n1", ["Aa"], leaf("n5", ["Aa"]), leaf("n6", ["Aa"])),
            leaf("n2", base[1:]),
        ),
        "one part",
    )
    yield (
        "children overlap",
        split("n0", base, leaf("n1", base[:3]), leaf("n2", base[2:])),
        "both sides",
    )
    yield (
        "children lose a part",
        split("n0", base, leaf("n1", base[:2]), leaf("n2", base[3:])),
        "neither child",
    )
    yield (
        "a single child",
        {"id": "n0", "parts": base, "name": "", "children": [leaf("n1", base)]},
        "one child",
    )
    yield (
        "duplicate node id",
        split("n0", base, leaf("n1", base[:2]), leaf("n1", base[2:])),
        "used twice",
    )
    yield ("keys missing", {"id": "n0", "name": ""}, "missing key")
    yield ("parts not a list", {"id": "n0", "parts": "AaBb", "children": []}, "must be a list")
    yield (
        "two balances with one name",
        split(
            "n0",
            base,
            leaf("n1", base[:2]),
            split("n2", base[2:], leaf("n3", ["Cc"]), leaf("n4", base[3:]), name="same"),
            name="same",
        ),
        "used twice",
    )


@pytest.mark.parametrize(("label", "bad", "words"), list(_bad_trees()), ids=lambda x: str(x)[:24])
def test_invalid_tree_from_front_end_is_refused(builder, model, label, bad, words):
    from_front_end(builder, tree=first_split())
    assert builder.messages == ""
    sbp_before = model.sbp.copy()
    names_before = list(model.balance_names)
    builder.comm.sent.clear()

    from_front_end(builder, tree=bad)

    assert builder.messages.startswith("change refused:")
    assert words in builder.messages
    assert np.array_equal(model.sbp, sbp_before)
    assert model.balance_names == names_before
    assert builder.tree == first_split()
    # the front end is told: the last valid tree and the message go back
    states = sent_states(builder)
    assert any(s.get("tree") == first_split() for s in states)
    assert any(s.get("messages", "").startswith("change refused:") for s in states)


def test_refused_tree_keeps_model_without_sbp(builder, model):
    bad = split("n0", PARTS, leaf("n1", PARTS[:3]), leaf("n2", PARTS[2:]))
    from_front_end(builder, tree=bad)
    assert model.sbp is None
    assert builder.tree == leaf("n0", PARTS)
    assert "Cc" in builder.messages


def test_front_end_message_path_end_to_end(builder, model, caplog):
    """The raw comm message (as the browser sends it) goes through without an exception."""
    msg = {
        "content": {
            "data": {"method": "update", "state": {"tree": first_split()}, "buffer_paths": []}
        },
        "buffers": [],
    }
    with caplog.at_level("WARNING"):
        builder._handle_msg(msg)
    assert not [r for r in caplog.records if "Exception in widget method" in r.getMessage()]
    assert model.sbp is not None


# --------------------------------------------------------------------------- valid edits


def test_valid_splits_update_model_sbp_and_stats(builder, model):
    from_front_end(builder, tree=first_split())
    from_front_end(builder, tree=two_splits())
    # SBP written by hand: columns Aa, Bb, Cc, Dd, X
    expected = np.array([[1, 1, -1, -1, -1], [0, 0, 1, -1, -1]], dtype=np.int8)
    assert builder.messages == ""
    assert np.array_equal(model.sbp, expected)
    assert model.balance_names == [f"Aa,Bb | Cc,Dd,{HTML_PART}", f"Cc | Dd,{HTML_PART}"]

    X = _values()
    total = total_variance_by_definition(X)
    assert builder.total_variance == pytest.approx(total)
    sides = [(["Aa", "Bb"], ["Cc", "Dd", HTML_PART]), (["Cc"], ["Dd", HTML_PART])]
    via_core = np.asarray(core.balances(X, expected, complete=False))
    assert [s["id"] for s in builder.stats] == ["n0", "n2"]
    for k, (num, den) in enumerate(sides):
        entry = builder.stats[k]
        b = balance_by_definition(X, num, den)
        assert entry["numerator"] == num and entry["denominator"] == den
        assert entry["name"] == model.balance_names[k]
        assert entry["variance"] == pytest.approx(np.var(b, ddof=1))
        assert entry["variance"] == pytest.approx(np.var(via_core[:, k], ddof=1))
        assert entry["share"] == pytest.approx(np.var(b, ddof=1) / total)
        assert entry["mean"] == pytest.approx(b.mean())
        for level in (5, 25, 50, 75, 95):
            assert entry[f"q{level}"] == pytest.approx(np.quantile(b, level / 100))
        site = model.metadata["site"].to_numpy()
        means = {g["code"]: g["mean"] for g in entry["groups"]}
        assert means[0] == pytest.approx(b[site == "north"].mean())
        assert means[1] == pytest.approx(b[site == "south"].mean())


def test_complete_partition_variances_add_up_to_total(builder):
    # Egozcue & Pawlowsky-Glahn (2005): the balances of a complete SBP are an
    # orthonormal basis, so their variances add up to the total variance.
    from_front_end(builder, tree=complete_tree())
    assert len(builder.stats) == len(PARTS) - 1
    assert sum(s["variance"] for s in builder.stats) == pytest.approx(builder.total_variance)
    assert sum(s["share"] for s in builder.stats) == pytest.approx(1.0)


def test_unsplitting_everything_clears_the_model_sbp(builder, model):
    from_front_end(builder, tree=two_splits())
    builder.colour_balance = "n2"
    from_front_end(builder, tree=leaf("n0", PARTS))
    assert model.sbp is None
    assert model.balance_names == []
    assert model.colour_by == ""
    assert builder.colour_balance == ""
    assert builder.stats == []


def test_rename_reaches_the_model_and_duplicates_are_refused(builder, model):
    tree = two_splits()
    from_front_end(builder, tree=tree)
    tree["children"][1]["name"] = "Cc vs rest"
    from_front_end(builder, tree=tree)
    assert model.balance_names[1] == "Cc vs rest"
    assert builder.stats[1]["name"] == "Cc vs rest"
    assert builder.stats[1]["custom_name"] == "Cc vs rest"
    assert builder.stats[1]["default_name"] == f"Cc | Dd,{HTML_PART}"

    clash = two_splits()
    clash["name"] = "Cc vs rest"
    clash["children"][1]["name"] = "Cc vs rest"
    from_front_end(builder, tree=clash)
    assert "used twice" in builder.messages
    assert model.balance_names[1] == "Cc vs rest"
    assert model.balance_names[0] == f"Aa,Bb | Cc,Dd,{HTML_PART}"


def test_front_end_cannot_change_parts(builder):
    from_front_end(builder, parts=["Aa", "Bb"])
    assert builder.parts == PARTS


# --------------------------------------------------------------------------- selection, groups


def test_selection_change_updates_only_selection_stats(builder, model):
    from_front_end(builder, tree=two_splits())
    changed: list[str] = []
    builder.observe(lambda c: changed.append(c["name"]), names=t_all(builder))
    builder.comm.sent.clear()

    rows = np.arange(0, N, 3)
    model.select(rows)

    assert set(changed) == {"selection_summary", "n_selected"}
    states = sent_states(builder)
    assert len(states) == 1  # one message for both traits
    for state in states:
        assert set(state) <= {"selection_summary", "n_selected"}
    assert builder.n_selected == rows.size
    b = balance_by_definition(_values()[rows], ["Cc"], ["Dd", HTML_PART])
    entry = builder.selection_stats[1]  # kernel side, full precision
    assert entry["id"] == "n2"
    assert entry["n"] == rows.size
    assert entry["mean"] == pytest.approx(b.mean())
    assert entry["q25"] == pytest.approx(np.quantile(b, 0.25))
    assert entry["q75"] == pytest.approx(np.quantile(b, 0.75))
    # what the front end gets: the same numbers in columns, to 6 significant digits
    sent = builder.selection_summary
    assert sent["ids"] == [e["id"] for e in builder.selection_stats] and sent["n"] == rows.size
    assert sent["mean"][1] == pytest.approx(b.mean(), rel=1e-5)
    assert sent["q75"][1] == pytest.approx(np.quantile(b, 0.75), rel=1e-5)

    changed.clear()
    model.select(rows)  # the same selection again: nothing to send
    assert changed == []


def test_a_selection_change_sends_a_small_message(builder, model):
    """Every balance of a complete SBP: the message of a selection change holds per balance
    its id and three 6-digit numbers (under 45 bytes), not a keyed record of 17-digit
    numbers (about 90 bytes)."""
    from_front_end(builder, tree=complete_tree())
    builder.comm.sent.clear()
    model.select(np.arange(0, N, 2))
    (state,) = sent_states(builder)
    size = len(json.dumps(state))
    k = len(builder.selection_stats)
    assert k == len(PARTS) - 1
    assert size < 45 * k + 80, size
    full = len(json.dumps({"selection_stats": builder.selection_stats, "n_selected": 0}))
    assert size < 0.6 * full


def t_all(widget) -> list[str]:
    return [name for name in widget.keys if not name.startswith("_")]


def test_group_column_change_updates_group_means_not_the_tree(builder, model):
    from_front_end(builder, tree=first_split())
    changed: list[str] = []
    builder.observe(lambda c: changed.append(c["name"]), names=t_all(builder))
    model.group_column = "batch"
    assert "tree" not in changed
    assert [g["name"] for g in builder.groups] == ["b1", "b2", "b3"]
    b = balance_by_definition(_values(), PARTS[:2], PARTS[2:])
    batch = model.metadata["batch"].to_numpy()
    means = {g["code"]: g["mean"] for g in builder.stats[0]["groups"]}
    for code, label in enumerate(["b1", "b2", "b3"]):
        assert means[code] == pytest.approx(b[batch == label].mean())


# --------------------------------------------------------------------------- colour by


def test_colour_balance_mirrors_model_colour_by(builder, model):
    from_front_end(builder, tree=two_splits())
    from_front_end(builder, colour_balance="n2")
    assert model.colour_by == f"Cc | Dd,{HTML_PART}"

    model.colour_by = model.balance_names[0]
    assert builder.colour_balance == "n0"
    model.colour_by = ""
    assert builder.colour_balance == ""

    from_front_end(builder, colour_balance="n2")
    renamed = two_splits()
    renamed["children"][1]["name"] = "my balance"
    from_front_end(builder, tree=renamed)
    assert model.colour_by == "my balance"  # the coloured balance keeps colouring
    assert builder.colour_balance == "n2"


def test_unknown_colour_balance_is_refused(builder, model):
    from_front_end(builder, tree=first_split())
    from_front_end(builder, colour_balance="n0")
    from_front_end(builder, colour_balance="n4")  # a leaf id, not a balance
    assert builder.colour_balance == "n0"
    assert "n4" in builder.messages
    assert model.colour_by == model.balance_names[0]


# --------------------------------------------------------------------------- model -> builder


def test_external_set_sbp_rebuilds_the_tree(builder, model):
    sbp = np.array([[1, -1, 1, 1, 1], [1, 0, -1, -1, 1]], dtype=np.int8)
    model.set_sbp(sbp, ["first", ""])
    assert builder.tree == sbp_to_tree(sbp, PARTS, ["first", ""])
    assert [s["name"] for s in builder.stats] == ["first", f"Aa,{HTML_PART} | Cc,Dd"]
    assert builder.tree["name"] == "first"
    assert builder.tree["children"][0]["name"] == ""  # a default name stays ""
    b = balance_by_definition(_values(), ["Aa", "Cc", "Dd", HTML_PART], ["Bb"])
    assert builder.stats[0]["variance"] == pytest.approx(np.var(b, ddof=1))


def test_external_rename_keeps_node_ids(builder, model):
    from_front_end(builder, tree=two_splits())
    model.set_sbp(model.sbp, ["whole", "inner"])
    assert builder.tree["id"] == "n0" and builder.tree["children"][1]["id"] == "n2"
    assert builder.tree["children"][1]["name"] == "inner"


def test_active_parts_change_resets_the_tree(builder, model):
    from_front_end(builder, tree=two_splits())
    model.active_parts = ["Aa", "Bb", "Cc"]
    assert builder.parts == ["Aa", "Bb", "Cc"]
    assert builder.tree == leaf("n0", ["Aa", "Bb", "Cc"])
    assert model.sbp is None
    assert builder.stats == []
    sub = _values()[:, :3]
    assert builder.total_variance == pytest.approx(
        float(np.var(np.log(sub) - np.log(sub).mean(axis=1, keepdims=True), axis=0, ddof=1).sum())
    )


def test_close_stops_following_the_model(model):
    b = BalanceBuilder(model)
    b.close()
    model.set_sbp(np.array([[1, 1, -1, -1, -1]]))
    assert b.tree == leaf("n0", PARTS)


# --------------------------------------------------------------------------- suggestions


def _clr_by_definition() -> np.ndarray:
    logs = np.log(_values())
    return logs - logs.mean(axis=1, keepdims=True)


def test_principal_suggestion_message(builder, model):
    builder._handle_custom_msg({"type": "suggest", "method": "principal"}, [])
    expected = principal.principal_balances(_clr_by_definition(), kind="clr")
    assert builder.messages == ""
    validate_tree(builder.tree, PARTS)
    assert np.array_equal(model.sbp, expected)
    assert len(builder.stats) == len(PARTS) - 1


def test_ward_suggestion_message(builder, model):
    builder._handle_custom_msg({"type": "suggest", "method": "ward"}, [])
    expected = principal.ward_sbp(_clr_by_definition(), PARTS)
    validate_tree(builder.tree, PARTS)
    assert np.array_equal(model.sbp, expected)


def test_unknown_suggestion_is_an_error(builder, model):
    builder._handle_custom_msg({"type": "suggest", "method": "astrology"}, [])
    assert "astrology" in builder.messages
    assert model.sbp is None


def test_suggestion_reports_progress(model):
    b = BalanceBuilder(model)
    b.progress_delay = 0.0  # report from the start (the default waits a second)
    seen: list[tuple[str, object]] = []
    b.observe(lambda c: seen.append((c["name"], c["new"])), names=["busy", "progress"])
    assert b.suggest("principal")
    assert ("busy", True) in seen
    assert any(name == "progress" and "principal balances" in value for name, value in seen)
    assert b.busy is False and b.progress == ""
    b.close()


# --------------------------------------------------------------------------- front-end code


def test_bundled_esm_has_no_html_injection():
    esm = BalanceBuilder._esm
    for word in ("innerHTML", "outerHTML", "insertAdjacentHTML", "document.write", "eval("):
        assert word not in esm
    assert esm.rstrip().endswith("export default { render };")


# --------------------------------------------------------------------------- incomplete rows


def _model_with_missing(rows_missing: list[int], n: int = N) -> CompositionModel:
    df = _frame().iloc[:n].copy()
    for r in rows_missing:
        df.iloc[r, PARTS.index("Cc")] = np.nan
    comp = read_composition(df, parts=PARTS, check_total=False)
    return CompositionModel(comp, group_column="site")


def test_statistics_and_suggestions_use_the_complete_rows(recording_comms):
    model = _model_with_missing([3, 17])
    b = BalanceBuilder(model)
    keep = np.setdiff1d(np.arange(N), [3, 17])
    X = _values()[keep]
    assert b.n_samples == N - 2 and b.n_rows == N  # the widget says 2 rows are left out
    assert b.total_variance == pytest.approx(total_variance_by_definition(X))
    from_front_end(b, tree=first_split())
    v = balance_by_definition(X, PARTS[:2], PARTS[2:])
    assert b.stats[0]["n"] == N - 2
    assert b.stats[0]["variance"] == pytest.approx(np.var(v, ddof=1))
    # an incomplete selected row counts as selected but has no balance value
    model.select([3, 4, 5])
    assert b.n_selected == 3
    assert b.selection_stats[0]["n"] == 2
    assert b.selection_stats[0]["mean"] == pytest.approx(
        balance_by_definition(_values()[[4, 5]], PARTS[:2], PARTS[2:]).mean()
    )
    assert b.suggest("principal")
    logs = np.log(X)
    expected = principal.principal_balances(logs - logs.mean(axis=1, keepdims=True), kind="clr")
    assert np.array_equal(model.sbp, expected)
    b.close()


def test_too_few_complete_rows_is_said_and_the_tree_still_works(recording_comms):
    model = _model_with_missing([0, 1], n=3)
    b = BalanceBuilder(model)
    assert "only 1 row has a positive value" in b.messages and "at least 2 rows" in b.messages
    assert b.total_variance is None
    from_front_end(b, tree=first_split())
    assert np.array_equal(model.sbp, [[1, 1, -1, -1, -1]])
    assert b.stats[0]["variance"] is None
    assert b.stats[0]["numerator"] == PARTS[:2]
    assert "only 1 row has a positive value" in b.messages and "at least 2 rows" in b.messages
    b._handle_custom_msg({"type": "suggest", "method": "principal"}, [])
    assert b.messages.startswith("no suggestion:")
    assert np.array_equal(model.sbp, [[1, 1, -1, -1, -1]])
    b.close()


def test_redefined_amalgamation_refreshes_the_statistics(builder, model):
    model.amalgamations = {"AB": ["Aa", "Bb"]}
    model.active_parts = ["AB", "Cc", "Dd"]
    X = _values()
    summed = np.column_stack([X[:, 0] + X[:, 1], X[:, 2], X[:, 3]])
    assert builder.parts == ["AB", "Cc", "Dd"]
    assert builder.total_variance == pytest.approx(
        float(
            np.var(
                np.log(summed) - np.log(summed).mean(axis=1, keepdims=True), axis=0, ddof=1
            ).sum()
        )
    )
    tree = split("n0", ["AB", "Cc", "Dd"], leaf("n1", ["AB"]), leaf("n2", ["Cc", "Dd"]))
    from_front_end(builder, tree=tree)
    model.amalgamations = {"AB": ["Aa", HTML_PART]}  # same name, other members
    assert builder.parts == ["AB", "Cc", "Dd"]
    assert builder.tree == tree
    redefined = np.column_stack([X[:, 0] + X[:, 4], X[:, 2], X[:, 3]])
    logs = np.log(redefined)
    b = np.sqrt(2 / 3) * (logs[:, 0] - logs[:, 1:].mean(axis=1))
    assert builder.stats[0]["variance"] == pytest.approx(np.var(b, ddof=1))


# --------------------------------------------------------------------------- figures


def custom_messages(widget) -> list[dict]:
    return [m["content"] for m in widget.comm.sent if m.get("method") == "custom"]


def answer_figure(widget, request: dict, data: bytes | None = None, error: str = "") -> None:
    """Deliver the front end's answer to a figure request, as ipywidgets does."""
    content = {"type": "figure", "id": request["id"], "format": request["format"]}
    if error:
        content["error"] = error
    widget._handle_custom_msg(content, [memoryview(data)] if data is not None else [])


def test_the_builder_carries_its_figure_control(builder):
    control = builder.figure_control
    assert control.file_name.value == "balance-dendrogram.png"
    # synced as a widget reference the front end turns into a view
    assert builder.get_state()["figure_control"] == f"IPY_MODEL_{control.model_id}"


def test_save_figure_asks_the_page_and_writes_its_answer(builder, tmp_path):
    svg = b'<?xml version="1.0"?><svg xmlns="http://www.w3.org/2000/svg"/>'
    path = builder.save_figure(tmp_path / "dendro.svg")
    assert path == tmp_path / "dendro.svg"
    assert builder.figure_control.format.value == "svg"
    (request,) = custom_messages(builder)
    assert request["type"] == "figure-request" and request["format"] == "svg"
    assert not path.exists()  # written when the page answers
    answer_figure(builder, request, svg)
    assert path.read_bytes() == svg
    assert builder.figure_control.message.value.startswith("Saved dendro.svg (SVG")
    # a second view answering the same request changes nothing
    answer_figure(builder, request, b"other")
    assert path.read_bytes() == svg


def test_save_figure_png_scale_and_refusals(builder, tmp_path):
    assert builder.save_figure(tmp_path / "d.png", scale=3) is None
    assert "scale 3" in builder.figure_control.message.value
    assert custom_messages(builder) == []
    builder.save_figure(tmp_path / "d.png", scale=4)
    (request,) = custom_messages(builder)
    assert (request["format"], request["scale"]) == ("png", 4)
    answer_figure(builder, request, error="this browser cannot draw the PNG (no canvas)")
    assert builder.figure_control.message.value == (
        "No figure saved: this browser cannot draw the PNG (no canvas)."
    )
    assert not (tmp_path / "d.png").exists()


def test_closing_the_builder_closes_its_figure_control(model):
    b = BalanceBuilder(model)
    control = b.figure_control
    b.close()
    assert control.comm is None


# --------------------------------------------------------------------- group separation


def _separation_reference(b: np.ndarray, labels: np.ndarray) -> dict:
    """scipy.stats one-way ANOVA and Kruskal-Wallis; eta squared by its definition."""
    from scipy import stats

    samples = [b[labels == g] for g in pd.unique(labels)]
    f = stats.f_oneway(*samples)
    h = stats.kruskal(*samples)
    between = sum(s.size * (s.mean() - b.mean()) ** 2 for s in samples)
    return {
        "anova_f": f.statistic,
        "anova_p": f.pvalue,
        "kruskal_h": h.statistic,
        "kruskal_p": h.pvalue,
        "between_share": between / np.sum((b - b.mean()) ** 2),
    }


def test_each_balance_carries_its_group_separation(builder, model):
    # Source: scipy.stats.f_oneway and scipy.stats.kruskal on the balances computed from
    # their definition, grouped by the model's grouping column.
    from_front_end(builder, tree=two_splits())
    X = _values()
    sides = [(["Aa", "Bb"], ["Cc", "Dd", HTML_PART]), (["Cc"], ["Dd", HTML_PART])]
    for group_column in ("site", "batch"):
        model.group_column = group_column
        labels = model.metadata[group_column].to_numpy()
        for entry, (num, den) in zip(builder.stats, sides, strict=True):
            expected = _separation_reference(balance_by_definition(X, num, den), labels)
            sep = entry["separation"]
            for key, value in expected.items():
                assert sep[key] == pytest.approx(value, rel=1e-9), (group_column, key)
            assert sep["n"] == N and sep["kruskal_n"] == N
            assert sep["n_groups"] == len(pd.unique(labels))
    model.group_column = ""
    assert all(entry["separation"] is None for entry in builder.stats)


def test_separation_follows_a_group_made_from_the_selection(builder, model):
    from_front_end(builder, tree=first_split())
    model.select(np.arange(0, N, 3))
    model.selection_to_group("picked")
    labels = model.metadata["picked"].to_numpy()
    b = balance_by_definition(_values(), PARTS[:2], PARTS[2:])
    expected = _separation_reference(b, labels)
    assert builder.stats[0]["separation"]["anova_f"] == pytest.approx(expected["anova_f"])


def test_separation_is_kept_per_balance_and_recomputed_when_the_data_change(builder, model):
    from_front_end(builder, tree=first_split())
    first = dict(builder.stats[0]["separation"])
    from_front_end(builder, tree=two_splits())  # the first balance is unchanged
    assert builder.stats[0]["separation"] == first
    model.active_parts = PARTS[:4]  # other parts: other balances, none kept
    from_front_end(
        builder, tree=split("n0", PARTS[:4], leaf("n1", PARTS[:2]), leaf("n2", PARTS[2:4]))
    )
    b = balance_by_definition(_values(), PARTS[:2], PARTS[2:4])
    expected = _separation_reference(b, model.metadata["site"].to_numpy())
    assert builder.stats[0]["separation"]["anova_f"] == pytest.approx(expected["anova_f"])
