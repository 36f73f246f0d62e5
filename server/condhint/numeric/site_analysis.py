"""The one analysis entry point for a site: scalar expressions (`analysis`) or array code with reductions
(`array_analysis`), chosen by what the expression contains."""
from __future__ import annotations

from condhint.config import Config
from condhint.expr import Node, topological
from condhint.numeric.analysis import Analysis, analyse
from condhint.numeric.array_analysis import analyse_arrays, has_reductions
from condhint.numeric.evaluate import Deadline
from condhint.site import Site


def analyse_site_values(site: Site, cfg: Config, root: Node | None = None, deadline: Deadline | None = None,
                        keep_points: bool = False) -> Analysis:
    """Analyse the site's expression (or a subexpression `root`) over its input ranges."""
    if has_reductions(topological(root or site.root)):
        return analyse_arrays(site, cfg, root, deadline, keep_points)
    return analyse(site, cfg, root, deadline, keep_points)
