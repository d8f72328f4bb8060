"""Policy keys mc_seed and mc_paths (issue #16): defaults and refusals."""

from grantval.policy import Policy, policy_from_rows
from grantval.pricing.paths import DEFAULT_PATHS, DEFAULT_SEED


def test_defaults_match_the_engine():
    assert Policy().mc_seed == DEFAULT_SEED
    assert Policy().mc_paths == DEFAULT_PATHS >= 100_000


def test_values_read_and_bad_ones_refused():
    v, p = policy_from_rows([(2, "mc_seed", "7"), (3, "mc_paths", "200,000")], "policy.csv")
    assert v == {"mc_seed": 7, "mc_paths": 200_000} and p == []
    v, p = policy_from_rows([(2, "mc_seed", "-1"), (3, "mc_paths", "10")], "policy.csv")
    assert v == {} and [(x.row, x.column) for x in p] == [(2, "value"), (3, "value")]
