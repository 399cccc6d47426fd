"""Tree form of a sequential binary partition: conversions and validation.

Reference for what an SBP is: Egozcue & Pawlowsky-Glahn (2005), "Groups of
parts and their balances in compositional data analysis", Math. Geol. 37(7):
the first row splits all parts, each later row splits one group made by an
earlier row; a binary tree with L leaves has L - 1 split nodes (common
practice, elementary graph theory).
"""

from __future__ import annotations

import copy
import json

import numpy as np
import pytest
from conftest import PROPERTY_SETTINGS, valid_sbps
from hypothesis import given
from hypothesis import strategies as st

from compwidgets.core import SBPError, validate_sbp
from compwidgets.core.tree import (
    leaf_groups,
    sbp_to_tree,
    split_nodes,
    tree_to_sbp,
    validate_tree,
)

NAMES = ["Fe", "Mg", "Ca", "Na", "K", "Ti", "Mn", "P"]


def _parts(D: int) -> list[str]:
    return NAMES[:D]


def _preorder_reference(S: np.ndarray) -> list[int]:
    """Row indices of S in pre-order, found recursively from the SBP definition."""
    supports = {
        frozenset(np.flatnonzero(r != 0).tolist()): i for i, r in enumerate(S)
    }  # each group is split by exactly one row

    def visit(group: frozenset) -> list[int]:
        if group not in supports:
            return []
        i = supports[group]
        plus = frozenset(np.flatnonzero(S[i] > 0).tolist())
        minus = frozenset(np.flatnonzero(S[i] < 0).tolist())
        return [i, *visit(plus), *visit(minus)]

    return visit(frozenset(range(S.shape[1])))


def _normalise(node: dict, parts: list[str]) -> dict:
    """The tree without its ids, parts in the order of ``parts``; leaf names dropped
    (a name is meaningful on split nodes only)."""
    return {
        "parts": sorted(node["parts"], key=parts.index),
        "name": node.get("name", "") if node["children"] else "",
        "children": [_normalise(c, parts) for c in node["children"]],
    }


@st.composite
def random_trees(draw, parts: list[str], complete: bool | None = None) -> dict:
    """A random tree by recursive random splitting; parts in any order within nodes."""
    counter = iter(range(10_000))
    prefix = draw(st.sampled_from(["", "node-", "x"]))

    def build(group: list[str]) -> dict:
        node = {
            "id": f"{prefix}{next(counter)}",
            "parts": draw(st.permutations(group)),
            "name": draw(st.sampled_from(["", "felsic vs mafic", "b-1", "Ä/Ö"])),
            "children": [],
        }
        split = complete if complete is not None else draw(st.booleans())
        if len(group) > 1 and split:
            shuffled = draw(st.permutations(group))
            cut = draw(st.integers(1, len(group) - 1))
            node["children"] = [build(shuffled[:cut]), build(shuffled[cut:])]
        return node

    return build(list(parts))


# ------------------------------------------------------------ round trips
@PROPERTY_SETTINGS
@given(data=st.data(), D=st.integers(2, 8))
def test_sbp_tree_sbp_round_trip(data, D):
    S = data.draw(valid_sbps(D))
    parts = _parts(D)
    names = [f"b{i}" for i in range(D - 1)]
    tree = sbp_to_tree(S, parts, names)
    validate_tree(tree, parts)
    S2, names2, ids = tree_to_sbp(tree, parts)
    # Rows come back in pre-order, found here by an independent recursion.
    order = _preorder_reference(S)
    np.testing.assert_array_equal(S2, S[order])
    assert names2 == [names[i] for i in order]
    assert S2.dtype == np.int8
    validate_sbp(S2, parts)  # still a valid complete SBP
    # Fixed point: a pre-order SBP survives unchanged, ids included.
    assert sbp_to_tree(S2, parts, names2) == tree
    assert len(set(ids)) == len(ids) == D - 1
    # Complete: every leaf holds one part; D - 1 splits for D leaves.
    groups = leaf_groups(tree)
    assert sorted(len(g) for g in groups) == [1] * D
    assert sorted(p for g in groups for p in g) == sorted(parts)


@PROPERTY_SETTINGS
@given(data=st.data(), D=st.integers(2, 8))
def test_tree_sbp_tree_round_trip(data, D):
    parts = _parts(D)
    tree = data.draw(random_trees(parts))
    before = copy.deepcopy(tree)
    S, names, ids = tree_to_sbp(tree, parts)
    assert tree == before  # the caller's tree is not changed
    back = sbp_to_tree(S, parts, names)
    assert _normalise(back, parts) == _normalise(tree, parts)
    # Each row is the definition applied to its split node.
    nodes = {n["id"]: n for n in split_nodes(tree)}
    assert list(nodes) == ids
    for row, node_id in zip(S, ids, strict=True):
        num, den = nodes[node_id]["children"]
        expected = np.array(
            [1 if p in num["parts"] else -1 if p in den["parts"] else 0 for p in parts]
        )
        np.testing.assert_array_equal(row, expected)
    # L leaves -> L - 1 split nodes (graph theory); the leaves partition the parts.
    groups = leaf_groups(tree)
    assert S.shape == (len(groups) - 1, D)
    assert sorted(p for g in groups for p in g) == sorted(parts)
    if S.shape[0]:
        validate_sbp(S, parts, complete=S.shape[0] == D - 1)
    # New ids: n0, n1, ... over all 2k + 1 nodes, unique.
    all_ids = [back["id"]]
    stack = list(back["children"])
    while stack:
        node = stack.pop()
        all_ids.append(node["id"])
        stack.extend(node["children"])
    assert sorted(all_ids, key=lambda s: int(s[1:])) == [f"n{i}" for i in range(2 * len(S) + 1)]
    assert back["id"] == "n0"
    assert json.loads(json.dumps(back)) == back  # plain JSON types only


@PROPERTY_SETTINGS
@given(data=st.data(), D=st.integers(3, 8))
def test_partial_prefixes(data, D):
    S = data.draw(valid_sbps(D))
    parts = _parts(D)
    k = data.draw(st.integers(1, D - 2))
    tree = sbp_to_tree(S[:k], parts)
    validate_tree(tree, parts)
    assert len(leaf_groups(tree)) == k + 1
    assert any(len(g) > 1 for g in leaf_groups(tree))
    S2, names, _ = tree_to_sbp(tree, parts)
    assert S2.shape == (k, D)
    assert names == [""] * k
    # Same set of splits as the prefix.
    assert {r.tobytes() for r in S2} == {r.astype(np.int8).tobytes() for r in S[:k]}


def test_worked_example_four_parts():
    # Balanced tree ((a, b), (c, d)) written out by hand from the SBP definition
    # (Egozcue & Pawlowsky-Glahn 2005): one row per split, +1 numerator, -1 denominator.
    parts = ["a", "b", "c", "d"]
    tree = {
        "id": "r",
        "parts": parts,
        "name": "ab/cd",
        "children": [
            {
                "id": "L",
                "parts": ["a", "b"],
                "name": "",
                "children": [
                    {"id": "a", "parts": ["a"], "name": "", "children": []},
                    {"id": "b", "parts": ["b"], "name": "", "children": []},
                ],
            },
            {
                "id": "R",
                "parts": ["d", "c"],
                "name": "c/d",
                "children": [
                    {"id": "d", "parts": ["d"], "name": "", "children": []},
                    {"id": "c", "parts": ["c"], "name": "", "children": []},
                ],
            },
        ],
    }
    S, names, ids = tree_to_sbp(tree, parts)
    np.testing.assert_array_equal(S, [[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, -1, 1]])
    assert names == ["ab/cd", "", "c/d"]
    assert ids == ["r", "L", "R"]
    assert leaf_groups(tree) == [["a"], ["b"], ["d"], ["c"]]


def test_unsplit_root():
    parts = ["x", "y", "z"]
    for empty in (None, np.zeros((0, 3))):
        tree = sbp_to_tree(empty, parts)
        assert tree == {"id": "n0", "parts": parts, "name": "", "children": []}
        S, names, ids = tree_to_sbp(tree, parts)
        assert S.shape == (0, 3) and names == [] and ids == []


def test_root_order_may_differ_from_parts():
    parts = ["x", "y", "z"]
    tree = sbp_to_tree([[1, -1, -1], [0, 1, -1]], parts)
    tree["parts"] = ["z", "x", "y"]
    S, _, _ = tree_to_sbp(tree, parts)
    np.testing.assert_array_equal(S, [[1, -1, -1], [0, 1, -1]])


def test_sbp_to_tree_rejects_bad_sbp_and_names():
    with pytest.raises(SBPError, match="row 2"):
        sbp_to_tree([[1, 1, -1], [1, 0, -1]], ["x", "y", "z"])
    with pytest.raises(SBPError, match="2 balance names for 1 rows"):
        sbp_to_tree([[1, -1, -1]], ["x", "y", "z"], ["a", "b"])
    with pytest.raises(SBPError, match="row 1 is not a string"):
        sbp_to_tree([[1, -1, -1]], ["x", "y", "z"], [3])


# ------------------------------------------------------ error catalogue
PARTS = ["Si", "Al", "Fe", "Mg"]


def _good() -> dict:
    return sbp_to_tree([[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]], PARTS)


def _break(edit) -> dict:
    tree = _good()
    edit(tree)
    return tree


def _set(path, key, value):
    def edit(tree):
        node = tree
        for i in path:
            node = node["children"][i]
        node[key] = value

    return edit


ERRORS = [
    # (edit, regex naming the node and the parts)
    (_set([0], "parts", ["Si", "Si"]), r"'n1'.*\{Si\} listed twice"),
    (_set([], "parts", ["Si", "Al", "Fe"]), r"'n0' \(root\): missing part\(s\) \{Mg\}"),
    (
        _set([], "parts", ["Si", "Al", "Fe", "Mg", "Cr"]),
        r"'n0' \(root\): unknown part\(s\) \{Cr\}",
    ),
    (
        _set([0, 0], "children", [{"id": "q1", "parts": ["Si"], "name": "", "children": []}] * 2),
        r"'n2': splits the single part 'Si'",
    ),
    (
        _set([1], "children", [{"id": "q", "parts": ["Fe"], "children": []}]),
        r"'n4'.*exactly one child",
    ),
    (_set([1], "children", [1, 2, 3]), r"'n4': has 3 children"),
    (_set([0], "name", 7), r"'n1': 'name' must be a string"),
    (_set([1, 0], "id", "n1"), r"id 'n1' is used twice"),
    (_set([1], "id", ""), r"root/1: 'id' must be a non-empty string"),
    (_set([0], "parts", "SiAl"), r"'n1': 'parts' must be a list"),
    (_set([0], "parts", []), r"'n1': has no parts"),
    (_set([1], "children", "none"), r"'n4': 'children' must be a list"),
    (_set([1, 0], "parts", ["Fe", "Al"]), r"'n4': children hold part\(s\) \{Al\}"),
    (_set([0, 1], "parts", ["Si"]), r"'n1': part\(s\) \{Si\} are on both sides"),
    (_set([0, 1], "parts", ["Al", "Fe"]), r"'n1': children hold part\(s\) \{Fe\}"),
    (_set([1], "parts", ["Fe", "Mg", "Si"]), r"'n0': part\(s\) \{Si\} are on both sides"),
]


@pytest.mark.parametrize(("edit", "message"), ERRORS)
def test_validate_tree_error_catalogue(edit, message):
    tree = _break(edit)
    with pytest.raises(SBPError, match=message):
        validate_tree(tree, PARTS)
    with pytest.raises(SBPError, match=message):
        tree_to_sbp(tree, PARTS)


def test_validate_tree_lost_part():
    tree = _good()
    tree["children"][1] = {"id": "n4", "parts": ["Fe"], "name": "", "children": []}
    with pytest.raises(SBPError, match=r"'n0': part\(s\) \{Mg\} are in neither child"):
        validate_tree(tree, PARTS)


def test_validate_tree_structure_errors():
    with pytest.raises(SBPError, match="at root: expected a dict, got list"):
        validate_tree([], PARTS)
    tree = _good()
    tree["children"][0] = "Si,Al"
    with pytest.raises(SBPError, match="at root/0: expected a dict, got str"):
        validate_tree(tree, PARTS)
    tree = _good()
    del tree["children"][1]["children"]
    with pytest.raises(SBPError, match=r"'n4': missing key\(s\) children"):
        validate_tree(tree, PARTS)
    with pytest.raises(SBPError, match="listed twice"):
        validate_tree(_good(), ["Si", "Si", "Fe", "Mg"])


def test_validate_tree_accepts_missing_name_and_does_not_mutate():
    tree = _good()
    del tree["children"][0]["name"]
    before = copy.deepcopy(tree)
    validate_tree(tree, PARTS)
    S, names, _ = tree_to_sbp(tree, PARTS)
    assert names[1] == ""
    assert tree == before
