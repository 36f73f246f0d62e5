"""Fixtures of the review tests (helpers live in support.py)."""
from tests.review.support import marram_repo  # noqa: F401  (a fixture)
