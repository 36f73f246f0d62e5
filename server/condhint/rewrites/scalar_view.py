"""Array code seen as scalar code: the result of every reduction an input, so that an elementwise formula of it
(`1 - np.cos(theta)` after `theta = np.linalg.norm(v)`) gets the scalar rules and the general search.

The input keeps the reduction's text and the name the code binds it to, and its range is the range of the
reduction's values on the array analysis' own sampled arrays (same seed, same length). There is no view when an
array is also used outside a reduction (an elementwise array result), or when two reductions read the same array:
their results are not independent, and sampling them as independent inputs would measure combinations the code
never computes.
"""
from __future__ import annotations

import zlib

import numpy as np

from condhint.config import Config
from condhint.expr import INPUT, Node, topological
from condhint.numeric.array_analysis import sample_inputs
from condhint.numeric.array_values import forward
from condhint.numeric.backends import F64_BACKEND
from condhint.numeric.reductions import REDUCTIONS
from condhint.site import Filter, InputRange, Interval, Site

SOURCE = "reduction"  # where the range of a reduction's input comes from: the sampled arrays


def scalar_view(site: Site, cfg: Config) -> tuple[Site, dict[int, Node]] | None:
    """The site with its reductions as inputs, and the map from its nodes to the view's (None: no view)."""
    nodes = topological(site.root)
    names = sorted({n.name for n in nodes if n.kind == INPUT})  # type: ignore[misc]
    try:
        cols, bounds, _, _ = sample_inputs(site, names, cfg, zlib.crc32(site.root.key().encode()))
        with np.errstate(all="ignore"):
            values = forward(nodes, cols, F64_BACKEND)
    except (TypeError, IndexError, KeyError, ValueError):  # shapes combined in a way the analysis does not model
        return None
    ranges = dict(site.ranges)
    ranges.update({k: InputRange(Interval(*bounds[k]), SOURCE) for k in names
                   if k not in site.arrays and bounds[k][0] == bounds[k][1]})  # `len(x)`: the length evaluated
    mapped: dict[int, Node] = {}

    def project(node: Node) -> Node | None:
        for n in topological(node):
            if id(n) in mapped:
                continue
            if n.kind in REDUCTIONS:
                v = np.asarray(values.get(id(n), np.nan), dtype=float)
                v = v[np.isfinite(v)]
                if REDUCTIONS[n.kind].array_result or not n.text or not len(v):
                    return None
                mapped[id(n)] = Node(INPUT, name=n.text, text=n.text, format=n.format, weak=False)
                ranges[n.text] = InputRange(Interval(float(v.min()), float(v.max())), SOURCE)
            elif n.args:
                args = tuple(mapped[id(a)] for a in n.args)
                mapped[id(n)] = n if all(a is b for a, b in zip(args, n.args)) else Node(
                    n.kind, args, name=n.name, value=n.value, exact=n.exact, span=n.span, is_int=n.is_int,
                    text=n.text, format=n.format, weak=n.weak)
            else:
                mapped[id(n)] = n
        return mapped[id(node)]

    root = project(site.root)
    if root is None or not _independent(site, nodes, mapped):
        return None
    filters = []
    for f in site.filters:
        condition = project(f.condition)
        if condition is not None and not _reads_arrays(condition, site):
            filters.append(Filter(condition, f.holds, f.line))
    view = Site(root=root, scope=site.scope, span=site.span, statement_line=site.statement_line, ranges=ranges,
                filters=tuple(filters), bindings=site.bindings,
                bindings_by_node={id(mapped[k]): b for k, b in site.bindings_by_node.items() if k in mapped},
                float_format=site.float_format, inlined=site.inlined,
                held_after=site.held_after)  # the inputs themselves are kept
    return view, mapped


def _reads_arrays(node: Node, site: Site) -> bool:
    return any(n.kind == INPUT and n.name in site.arrays for n in topological(node))


def _independent(site: Site, nodes: list[Node], mapped: dict[int, Node]) -> bool:
    """No array outside a reduction, and no array read by two of the view's reductions."""
    view = topological(mapped[id(site.root)])
    if _reads_arrays(mapped[id(site.root)], site):
        return False
    leaves = {id(n) for n in view if n.kind == INPUT}
    read: dict[str, str] = {}  # array -> the reduction text reading it (one text: one value, one input)
    for n in nodes:
        if n.kind in REDUCTIONS and id(mapped.get(id(n))) in leaves:
            for a in topological(n):
                if a.kind == INPUT and a.name in site.arrays and read.setdefault(a.name, n.text) != n.text:
                    return False
    return True
