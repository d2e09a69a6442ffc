"""The value split behind the parcel view and the parcel report: exact currency parts of a value."""
from __future__ import annotations

import math

import numpy as np

from reval.roll.split import apportion, value_split


def test_apportion_is_hamiltons_largest_remainder_method() -> None:
    # Hand-worked example of Hamilton's (largest-remainder) apportionment: quotas 3.6, 2.3, 4.1 of 10 seats
    # get floors 3, 2, 4 (9 seats) and the one seat left goes to the largest remainder (0.6).
    assert apportion(np.array([3.6, 2.3, 4.1]), 10).tolist() == [4, 2, 4]
    # negative parts (a feature that lowers the value) the same way: floors -2, 3, 0 and the two units left
    # go to the largest remainders 0.8 and 0.7
    assert apportion(np.array([-1.5, 3.7, 0.8]), 3).tolist() == [-2, 4, 1]


def test_value_split_is_exact_and_splits_in_proportion_to_log_parts() -> None:
    # Worked example: base 100 and two equal log parts of ln(2)/2 make 200; each part gets half of 100.
    half = math.log(2) / 2
    split = value_split(math.log(100), {"a": half, "b": half})
    assert split["value"] == 200 and split["base"] == 100
    assert [p["currency"] for p in split["parts"]] == [50, 50]
    # Log-mean Divisia split (Ang 2004, "Decomposition analysis for policymaking in energy", Energy Policy
    # 32:1131-1139): part_i = c_i * L(V, B) with L the logarithmic mean; it leaves no residual.
    rng = np.random.default_rng(7)
    for _ in range(200):
        logs = dict(zip("abcdefg", rng.normal(0, 0.3, 7)))
        base = rng.uniform(9, 14)
        split = value_split(base, logs)
        parts = [p["currency"] for p in split["parts"]]
        assert split["base"] + sum(parts) == split["value"] == round(math.exp(base + sum(logs.values())))
        exact = np.array([p["exact"] for p in split["parts"]])
        assert np.all(np.sign(exact) == np.sign(list(logs.values())))
        assert math.isclose(math.exp(base) + exact.sum(), math.exp(base + sum(logs.values())), rel_tol=1e-12)
    # parts that cancel: the value equals the base and the split stays finite
    split = value_split(math.log(5000), {"a": 0.25, "b": -0.25})
    assert split["value"] == 5000 and [p["currency"] for p in split["parts"]] == [1250, -1250]
