"""Verified stable rewrites: quick fixes for findings and `condhint fix` (design §3).

Public entry points (the core never imports this package; `condhint.fixing` calls it):
- `fixes_for(subject, cfg) -> list[Fix]`: verified fixes for one finding (a `Subject`), best first;
- `apply_fixes(text, fixes) -> str`: the text with non-overlapping fixes and their imports applied.

See docs/rewrites.md for how a rule is defined, verified and added.
"""
from condhint.rewrites.apply import apply_fixes
from condhint.rewrites.propose import Subject, fixes_for
from condhint.rewrites.recheck import FIXABLE

__all__ = ["FIXABLE", "Subject", "apply_fixes", "fixes_for"]
