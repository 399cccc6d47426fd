"""The tree form of a sequential binary partition (SBP).

An SBP (Egozcue & Pawlowsky-Glahn 2005, Groups of parts and their balances
in compositional data analysis, Math. Geol. 37(7), 795-828; from memory) is a
binary tree: the root holds all parts, each split node divides its parts into
a numerator group and a denominator group, and each split gives one balance. This module converts
between that tree and the signed matrix used by :mod:`compwidgets.core.sbp`.

A node is a plain dict (JSON-friendly)::

    {"id": str, "parts": [str, ...], "name": str, "children": []}          # leaf
    {"id": str, "parts": [...], "name": str, "children": [num, den]}       # split

``children[0]`` is the ``+1`` (numerator) side and ``children[1]`` the ``-1``
(denominator) side. ``name`` is the balance name of a split node (``""`` means
the default name); ids are opaque unique strings. SBP row order is the
pre-order traversal of the split nodes (depth first, numerator child before
denominator child), so the first row splits all parts and every later row
splits a group made by an earlier row. A tree whose leaves still hold more
than one part is a partial SBP (a partition being built).
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence

import numpy as np

from .sbp import SBPError, validate_sbp

_KEYS = ("id", "parts", "children")
#: Every key a node may have ("name" is optional).
_ALLOWED = ("id", "parts", "name", "children")


def _where(node, path: str) -> str:
    node_id = node.get("id") if isinstance(node, dict) else None
    if isinstance(node_id, str) and node_id:
        return f"tree node {node_id!r}"
    return f"tree node at {path}"


def _list(items) -> str:
    return "{" + ", ".join(str(p) for p in items) + "}"


def _check_node(node, path: str) -> None:
    """Check the fields of one node (not its relation to other nodes)."""
    if not isinstance(node, dict):
        raise SBPError(f"tree node at {path}: expected a dict, got {type(node).__name__}")
    where = _where(node, path)
    missing = [k for k in _KEYS if k not in node]
    if missing:
        raise SBPError(f"{where}: missing key(s) {', '.join(missing)}")
    unknown = [k for k in node if k not in _ALLOWED]
    if unknown:
        raise SBPError(
            f"{where}: unknown key(s) {', '.join(map(repr, unknown))}; a node has "
            f"{', '.join(_ALLOWED)}"
        )
    if not isinstance(node["id"], str) or not node["id"]:
        raise SBPError(f"tree node at {path}: 'id' must be a non-empty string, got {node['id']!r}")
    if "name" in node and not isinstance(node["name"], str):
        raise SBPError(f"{where}: 'name' must be a string, got {type(node['name']).__name__}")
    parts = node["parts"]
    if not isinstance(parts, list) or not all(isinstance(p, str) for p in parts):
        raise SBPError(f"{where}: 'parts' must be a list of part names (strings)")
    if not parts:
        raise SBPError(f"{where}: has no parts")
    seen: set[str] = set()
    twice = [p for p in parts if p in seen or seen.add(p)]
    if twice:
        raise SBPError(f"{where}: part(s) {_list(dict.fromkeys(twice))} listed twice")
    children = node["children"]
    if not isinstance(children, list):
        raise SBPError(f"{where}: 'children' must be a list, got {type(children).__name__}")
    if len(children) == 1:
        raise SBPError(f"{where}: has exactly one child; a node is a leaf ([]) or is split in two")
    if len(children) > 2:
        raise SBPError(f"{where}: has {len(children)} children; a split has exactly two")
    if len(children) == 2 and len(parts) == 1:
        raise SBPError(f"{where}: splits the single part {parts[0]!r}; one part cannot be split")


def validate_tree(tree, parts: Sequence[str]) -> None:
    """Check that ``tree`` is a valid (possibly partial) SBP tree over ``parts``.

    Parameters
    ----------
    tree : dict
        Root node (see the module docstring for the format).
    parts : sequence of str
        The parts the root must hold (the active parts), each exactly once.

    Raises
    ------
    SBPError
        Naming the node (by id, or by its path such as ``root/0/1``) and the
        parts concerned: not a dict, missing or unknown key, bad id or name, duplicate
        id, duplicate / missing / unknown part, one part split, exactly one
        child, children that do not partition their parent.
    """
    parts = [str(p) for p in parts]
    if len(set(parts)) != len(parts):
        raise SBPError(f"validate_tree: a part is listed twice in {parts}")
    _check_node(tree, "root")
    root_parts = tree["parts"]
    unknown = [p for p in root_parts if p not in set(parts)]
    if unknown:
        raise SBPError(f"{_where(tree, 'root')} (root): unknown part(s) {_list(unknown)}")
    absent = [p for p in parts if p not in set(root_parts)]
    if absent:
        raise SBPError(f"{_where(tree, 'root')} (root): missing part(s) {_list(absent)}")
    ids: dict[str, str] = {}
    stack = [(tree, "root")]
    while stack:
        node, path = stack.pop()
        if node["id"] in ids:
            raise SBPError(
                f"tree node at {path}: id {node['id']!r} is used twice (also at {ids[node['id']]})"
            )
        ids[node["id"]] = path
        if not node["children"]:
            continue
        where = _where(node, path)
        for i, child in enumerate(node["children"]):
            _check_node(child, f"{path}/{i}")
        num, den = (set(c["parts"]) for c in node["children"])
        own = set(node["parts"])
        both = [p for p in node["parts"] if p in num and p in den]
        if both:
            raise SBPError(
                f"{where}: part(s) {_list(both)} are on both sides (numerator and denominator)"
            )
        foreign = [p for c in node["children"] for p in c["parts"] if p not in own]
        if foreign:
            raise SBPError(
                f"{where}: children hold part(s) {_list(foreign)} that are not in this node "
                f"{_list(node['parts'])}"
            )
        lost = [p for p in node["parts"] if p not in num and p not in den]
        if lost:
            raise SBPError(
                f"{where}: part(s) {_list(lost)} are in neither child; the children must "
                f"partition {_list(node['parts'])}"
            )
        # push the denominator first so the numerator subtree is checked first
        stack.append((node["children"][1], f"{path}/1"))
        stack.append((node["children"][0], f"{path}/0"))


def _preorder(tree: dict) -> Iterator[dict]:
    stack = [tree]
    while stack:
        node = stack.pop()
        yield node
        stack.extend(reversed(node["children"]))


def tree_to_sbp(tree: dict, parts: Sequence[str]) -> tuple[np.ndarray, list[str], list[str]]:
    """Signed SBP matrix of a (possibly partial) tree.

    Parameters
    ----------
    tree : dict
        Root node, checked with :func:`validate_tree`.
    parts : sequence of str
        Column order of the matrix (the active parts).

    Returns
    -------
    sbp : ndarray of int8, shape (k, D)
        One row per split node in pre-order (k = 0 for an unsplit root;
        k = D - 1 for a complete partition). ``+1`` numerator, ``-1``
        denominator, ``0`` outside the split group.
    names : list of str
        The ``name`` of each split node (``""`` = default name).
    ids : list of str
        The id of each split node.
    """
    validate_tree(tree, parts)
    parts = [str(p) for p in parts]
    column = {p: j for j, p in enumerate(parts)}
    rows, names, ids = [], [], []
    for node in _preorder(tree):
        if not node["children"]:
            continue
        row = np.zeros(len(parts), dtype=np.int8)
        num, den = node["children"]
        row[[column[p] for p in num["parts"]]] = 1
        row[[column[p] for p in den["parts"]]] = -1
        rows.append(row)
        names.append(node.get("name", ""))
        ids.append(node["id"])
    sbp = np.array(rows, dtype=np.int8).reshape(len(rows), len(parts))
    return sbp, names, ids


def sbp_to_tree(sbp, parts: Sequence[str], names: Sequence[str] | None = None) -> dict:
    """Tree of a (possibly partial) SBP matrix.

    Parameters
    ----------
    sbp : array-like of shape (k, D), or None
        Signed matrix validated with ``validate_sbp(..., complete=False)``;
        None or an empty (0, D) matrix gives an unsplit root.
    parts : sequence of str
        Names of the D columns.
    names : sequence of str, optional
        One balance name per row (``""`` = default); default all ``""``.

    Returns
    -------
    dict
        Root node. Ids are ``"n0", "n1", ...`` in pre-order over all nodes,
        leaves included; groups not yet split are leaves. Parts inside each
        node keep the order of ``parts``.

    Notes
    -----
    :func:`tree_to_sbp` lists split nodes in pre-order. A valid SBP whose rows
    are in another order (e.g. the denominator group split before the
    numerator group) gives the same tree, and comes back from
    :func:`tree_to_sbp` with its rows (and names) in pre-order.
    """
    parts = [str(p) for p in parts]
    D = len(parts)
    if sbp is None or np.asarray(sbp).size == 0:
        S = np.zeros((0, D), dtype=np.int8)
    else:
        S = validate_sbp(sbp, parts, complete=False)
        if S.shape[1] != D:
            raise SBPError(f"sbp_to_tree: the SBP has {S.shape[1]} columns for {D} parts")
    if names is None:
        names = [""] * S.shape[0]
    names = list(names)
    if len(names) != S.shape[0]:
        raise SBPError(f"sbp_to_tree: {len(names)} balance names for {S.shape[0]} rows")
    bad = [i + 1 for i, n in enumerate(names) if not isinstance(n, str)]
    if bad:
        raise SBPError(f"sbp_to_tree: balance name of row {bad[0]} is not a string")

    def leaf(cols) -> dict:
        return {"id": "", "parts": [parts[j] for j in sorted(cols)], "name": "", "children": []}

    root = leaf(range(D))
    leaves = {frozenset(range(D)): root}
    for row, name in zip(S, names, strict=True):
        plus = frozenset(np.flatnonzero(row > 0).tolist())
        minus = frozenset(np.flatnonzero(row < 0).tolist())
        node = leaves.pop(plus | minus)  # exists: validate_sbp checked it
        node["name"] = name
        node["children"] = [leaf(plus), leaf(minus)]
        leaves[plus], leaves[minus] = node["children"]
    for i, node in enumerate(_preorder(root)):
        node["id"] = f"n{i}"
    return root


def leaf_groups(tree: dict) -> list[list[str]]:
    """Parts of each leaf, left to right (numerator side first).

    For a complete partition every group has one part; a partial tree has
    groups of several parts still to be split.
    """
    return [list(node["parts"]) for node in _preorder(tree) if not node["children"]]


def split_nodes(tree: dict) -> list[dict]:
    """The split nodes of ``tree`` in pre-order (one per SBP row)."""
    return [node for node in _preorder(tree) if node["children"]]
