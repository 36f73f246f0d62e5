"""Verified stable rewrites: quick fixes for findings and `condhint fix` (design §3).

Public entry points:
- `fixes_for(finding, module_analysis, cfg) -> list[Fix]`: verified fixes for one finding, best first;
- `attach_fixes(module_analysis, cfg)`: the same for every formula/overflow/domain finding of a module;
- `apply_fixes(text, fixes) -> str`: the text with non-overlapping fixes and their imports applied.

See docs/rewrites.md for how a rule is defined, verified and added.
"""
from condhint.rewrites.apply import apply_fixes
from condhint.rewrites.propose import attach_fixes, fixes_for
from condhint.rewrites.recheck import FIXABLE

__all__ = ["FIXABLE", "apply_fixes", "attach_fixes", "fixes_for"]
