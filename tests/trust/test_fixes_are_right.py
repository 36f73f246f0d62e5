"""A fix never changes what the code computes: it is checked at the other sign of inputs whose sign the code
does not fix, and never writes a name that holds another value where the fix lands."""
from __future__ import annotations

import numpy as np
import pytest

from condhint.expr import topological
from condhint.rewrites import codegen, dag
from tests.rewrites.support import analysed, context_for


def test_a_candidate_equal_only_for_positive_inputs_is_refused_on_an_assumed_range() -> None:
    # sqrt(x * x) is |x|: the candidate `x` agrees only for x > 0 (common practice)
    for header, refused in (("def f(x):", True), ("def f(x):  # condhint: 1e-3 <= x <= 1e3", False)):
        ma = analysed(f"import math\n{header}\n    return math.sqrt(x * x) + 1.0\n")
        ctx, node, bench, _, site = context_for(ma, "math.sqrt(x * x)")
        x = next(n for n in _nodes(site.root) if n.kind == "input")
        candidate = dag.substitute(site.root, node, x)
        idx = np.arange(bench.n)
        why = bench.unsigned_disagreement(candidate, idx, 1e-12, None)
        assert (why is not None) == refused, why
        if refused:
            assert "x > 0" in why
        # |x| itself is right at every sign
        assert bench.unsigned_disagreement(dag.substitute(site.root, node, dag.call("abs", x)), idx, 1e-12,
                                           None) is None


def test_a_name_rebound_before_the_fix_is_never_written() -> None:
    # after `x = scale * 3.0`, `x` no longer holds the parameter the candidate log1p(x) is about
    src = """
        import math
        def h(x, scale):  # condhint: 1e-9 <= x <= 1e-6, 1 <= scale <= 2
            y = 1 + x
            x = scale * 3.0
            return math.log(y) * x
        """
    ma = analysed(src)
    _, node, _, writer, site = context_for(ma, "math.log(y)")
    x = next(n for n in _nodes(site.root) if n.kind == "input" and n.name == "x")
    with pytest.raises(codegen.Unspellable, match="another value"):
        writer.write(dag.call("log1p", x))
    kept = analysed(src.replace("            x = scale * 3.0\n", "            scale = scale * 3.0\n")
                    .replace("* x\n", "* scale\n"))
    _, node, _, writer, site = context_for(kept, "math.log(y)")
    x = next(n for n in _nodes(site.root) if n.kind == "input" and n.name == "x")
    assert writer.write(dag.call("log1p", x))[0] == "math.log1p(x)"


_nodes = topological