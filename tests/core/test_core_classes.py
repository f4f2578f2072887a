"""ABC classes: cut-offs 80/15/5 % of annual spend (common practice; Silver, Pyke &
Peterson 1998, ch. 3). Spends below are invented; the expected classes are worked by hand
from the rule."""

import numpy as np

from xlpolicy.core.classes import abc_classes


def test_pareto_classes_by_hand():
    # spends 500, 250, 100, 80, 40, 20, 10 (total 1000): shares before each item in rank
    # order: 0, .50, .75, .85, .93, .97, .99 -> A, A, A, B, B, C, C
    spend = [100, 20, 500, 10, 250, 40, 80]
    assert list(abc_classes(spend)) == ["A", "C", "A", "C", "A", "B", "B"]


def test_invalid_spend_gets_no_class_and_custom_cutoffs():
    out = abc_classes([np.nan, 10, 10, -1], cutoffs=(0.5, 0.9))
    assert list(out) == ["", "A", "B", ""]


def test_every_valid_item_is_classed_and_a_holds_the_top_spender():
    rng = np.random.default_rng(1)
    spend = rng.lognormal(5, 2, 500)
    out = abc_classes(spend)
    assert set(out) == {"A", "B", "C"}
    assert out[np.argmax(spend)] == "A"
    share_a = spend[out == "A"].sum() / spend.sum()
    assert 0.8 <= share_a < 0.8 + spend.max() / spend.sum()
