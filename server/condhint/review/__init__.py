"""Headless review: what `condhint check` needs beyond one file's analysis in CI and code review.

Changed lines since a git revision, baselines of accepted findings, parallel and sharded runs, notebooks,
summary statistics, progress on a terminal, and the per-expression explanation behind `condhint explain`.
"""
