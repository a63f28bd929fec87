"""Campaign files: loading, validation messages, policy hash."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from service.errors import PolicyError
from service.policy import ArmCost, Campaign, load_campaigns, policy_hash

EXAMPLE = Path(__file__).resolve().parents[2] / "campaigns" / "larkspur.toml"

MINIMAL = """
[campaigns.spring]
model = "larkspur"
salt = "s1"
[campaigns.spring.arms]
email = { cost = 0.40 }
"""


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "campaigns.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_example_campaign_file_loads_with_its_opt_out_file() -> None:
    campaign = load_campaigns(EXAMPLE)["larkspur-renewal"]
    assert campaign.model == "larkspur"
    assert campaign.arm_names == ("email", "call")
    np.testing.assert_array_equal(campaign.costs, [0.40, 3.50])
    assert (campaign.value, campaign.exploration, campaign.holdout) == (40.0, 0.05, 0.10)
    assert campaign.capacity == 500
    # Ids from the inline list and from larkspur-optout.txt are both suppressed.
    flags = campaign.opted_out(["LTC-000007", "LTC-000099", "LTC-000008"])
    assert flags.tolist() == [True, True, False]


def test_defaults_apply_to_optional_keys(tmp_path: Path) -> None:
    campaign = load_campaigns(_write(tmp_path, MINIMAL))["spring"]
    assert campaign.value == 1.0
    assert (campaign.exploration, campaign.holdout, campaign.dnc_margin) == (0.0, 0.0, 0.0)
    assert campaign.confidence == 0.90
    assert campaign.capacity is None and campaign.model_version is None
    assert campaign.suppression == frozenset()


@pytest.mark.parametrize(
    ("line", "match"),
    [
        ("exploration = 1.5", r"'spring': key 'exploration' = 1.5 must lie in \[0, 1\)"),
        ("holdout = -0.1", r"'spring': key 'holdout' = -0.1 must lie in \[0, 1\)"),
        ("confidence = 0.4", r"'spring': key 'confidence' = 0.4 must lie in \(0.5, 1\)"),
        ("value = 0", r"'spring': key 'value' = 0.0 must be a finite number > 0"),
        ("value = true", r"'spring': key 'value' must be a number"),
        ("capacity = 2.5", r"'spring': key 'capacity' must be a whole number"),
        ("capacity = 0", r"'spring': key 'capacity' = 0 must be a positive integer"),
        ("dnc_margin = -1", r"'spring': key 'dnc_margin' = -1.0 must be a finite"),
        ("explortion = 0.1", r"'spring': unknown key\(s\) \['explortion'\]"),
        ("suppression = 'LTC-1'", r"'spring': key 'suppression' must be a list"),
        ("suppression_file = 'nope.txt'", r"'spring': key 'suppression_file' = 'nope.txt'"),
    ],
)
def test_invalid_keys_are_named_with_their_campaign(tmp_path: Path, line: str, match: str) -> None:
    text = MINIMAL.replace('salt = "s1"', f'salt = "s1"\n{line}')
    with pytest.raises(PolicyError, match=match):
        load_campaigns(_write(tmp_path, text))


@pytest.mark.parametrize(
    ("text", "match"),
    [
        (MINIMAL.replace('salt = "s1"\n', ""), r"'spring': key 'salt' is required"),
        (MINIMAL.replace("{ cost = 0.40 }", "{ cost = -1 }"), r"'arms.email.cost' = -1.0"),
        (MINIMAL.replace("{ cost = 0.40 }", "{ price = 1 }"), r"'arms.email' must be a table"),
        (MINIMAL.replace("email =", "none ="), r"'arms.none' is not a usable arm name"),
        (MINIMAL.replace("[campaigns.spring]", "[campaign.spring]"), r"top-level key"),
        ("[campaigns]\n", r"declares no campaign"),
        ("[campaigns.x\n", r"is not valid TOML"),
    ],
)
def test_structural_errors_say_what_to_fix(tmp_path: Path, text: str, match: str) -> None:
    with pytest.raises(PolicyError, match=match):
        load_campaigns(_write(tmp_path, text))


def test_missing_file_is_a_policy_error(tmp_path: Path) -> None:
    with pytest.raises(PolicyError, match=r"does not exist"):
        load_campaigns(tmp_path / "absent.toml")


def test_policy_hash_tracks_every_decision_relevant_field(tmp_path: Path) -> None:
    base = load_campaigns(_write(tmp_path, MINIMAL))["spring"]
    again = load_campaigns(_write(tmp_path, MINIMAL))["spring"]
    assert base.hash == again.hash == policy_hash(base)
    assert len(base.hash) == 64
    variants = [
        MINIMAL.replace('"s1"', '"s2"'),
        MINIMAL.replace("0.40", "0.41"),
        MINIMAL.replace('salt = "s1"', 'salt = "s1"\nsuppression = ["LTC-000007"]'),
        MINIMAL.replace('salt = "s1"', 'salt = "s1"\nexploration = 0.05'),
        MINIMAL.replace('salt = "s1"', 'salt = "s1"\nmodel_version = "v0002"'),
    ]
    hashes = {load_campaigns(_write(tmp_path, text))["spring"].hash for text in variants}
    assert len(hashes) == len(variants) and base.hash not in hashes
    # An integer and a float spelling of the same value are the same policy.
    same = MINIMAL.replace('salt = "s1"', 'salt = "s1"\nvalue = 1')
    assert load_campaigns(_write(tmp_path, same))["spring"].hash == base.hash


def test_arm_columns_map_campaign_arms_to_model_columns() -> None:
    campaign = Campaign(
        id="c", model="m", salt="s", arms=(ArmCost("call", 3.5), ArmCost("email", 0.4))
    )
    assert campaign.arm_columns(["email", "call", "letter"]).tolist() == [1, 0]
    with pytest.raises(PolicyError, match=r"arm\(s\) \['call'\] are not arms of model 'm'"):
        campaign.arm_columns(["email"])


def test_describe_hides_salt_and_opt_out_ids() -> None:
    campaign = Campaign(
        id="c",
        model="m",
        salt="secret",
        arms=(ArmCost("email", 0.4),),
        suppression=frozenset({"A"}),
    )
    summary = campaign.describe()
    assert "secret" not in str(summary) and "'A'" not in str(summary)
    assert summary["suppressed"] == 1 and summary["policy_hash"] == campaign.hash
