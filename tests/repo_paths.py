"""Where the repository, the tests and their data are, wherever a test file sits.

Test files live one folder down (tests/core, tests/reading, ...), so a path worked out
from a test's own ``__file__`` would depend on its folder; these do not.
"""

from __future__ import annotations

from pathlib import Path

TESTS = Path(__file__).resolve().parent
REPO = TESTS.parent
DATA = TESTS / "data"
BAD = DATA / "bad"
FUZZ = DATA / "fuzz"
