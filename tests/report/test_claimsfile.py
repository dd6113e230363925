"""Claims files: accepted forms, and errors that name the file, the line and the key."""
from __future__ import annotations

import datetime as dt

import pytest
from hypothesis import given, settings, strategies as st

from procmetrics.claims.registry import SPECS
from procmetrics.errors import ConfigError
from procmetrics.claims.reader import load_claims, parse_claims

GOOD = """\
format = 1
level = 0.9

[[claim]]
id = "review-up"
text = "Review rose."
kind = "review_coverage_rose"
date = "policy"

[[claim]]
id = "lt"
kind = "median_lifetime_below"
threshold_days = 60
after = 2022-01-01
level = 0.99
"""


def test_good_file_parses_with_defaults_and_dates():
    cf = parse_claims(GOOD, "c.toml")
    a, b = cf.claims
    assert (a.id, a.kind, a.params["date"], a.level, a.line) == (
        "review-up", "review_coverage_rose", "policy", 0.9, 4)
    assert b.params == {"threshold_days": 60.0, "after": dt.date(2022, 1, 1)}
    assert b.level == 0.99 and b.text == SPECS["median_lifetime_below"].summary
    assert len(cf.sha256) == 64


def err(text: str) -> ConfigError:
    with pytest.raises(ConfigError) as ei:
        parse_claims(text, "claims.toml")
    return ei.value


def test_syntax_error_names_the_line():
    e = err('[[claim]]\nid = "a"\nkind = = "x"\n')
    assert (e.path, e.line) == ("claims.toml", 3)
    assert str(e).startswith("claims.toml:3")


def test_unknown_kind_names_line_and_key():
    e = err('[[claim]]\nid = "a"\n\nkind = "fewer_bugs"\n')
    assert (e.line, e.key) == (4, "kind")
    assert "known kinds" in str(e)


def test_wrong_type_names_line_and_key():
    e = err(GOOD.replace("threshold_days = 60", 'threshold_days = "sixty"'))
    assert (e.line, e.key) == (13, "threshold_days")
    assert "claim 'lt'" in str(e)


def test_missing_parameter_points_at_the_claim_header():
    e = err('[[claim]]\nid = "a"\nkind = "at_least"\nmetric = "fix_ratio"\n')
    assert (e.line, e.key) == (1, "threshold")


def test_typo_key_is_refused():
    e = err('[[claim]]\nid = "a"\nkind = "no_defects_remain"\nthreshhold = 3\n')
    assert (e.line, e.key) == (4, "threshhold")


def test_duplicate_id_and_bad_share_and_top_level_key():
    e = err('[[claim]]\nid = "a"\nkind = "no_defects_remain"\n\n'
            '[[claim]]\nid = "a"\nkind = "no_defects_remain"\n')
    assert (e.line, e.key) == (6, "id") and "duplicate" in str(e)
    e = err('[[claim]]\nid = "a"\nkind = "at_least"\nmetric = "fix_ratio"\nthreshold = 80\n')
    assert (e.line, e.key) == (5, "threshold") and "0.8 for 80%" in str(e)
    e = err('levle = 0.9\n[[claim]]\nid = "a"\nkind = "no_defects_remain"\n')
    assert (e.line, e.key) == (1, "levle")


def test_no_claims_and_missing_file(tmp_path):
    assert "no claims" in str(err("format = 1\n"))
    with pytest.raises(ConfigError) as ei:
        load_claims(tmp_path / "absent.toml")
    assert str(tmp_path / "absent.toml") in str(ei.value)


def test_non_utf8_names_the_line(tmp_path):
    p = tmp_path / "c.toml"
    p.write_bytes(b'[[claim]]\nid = "a"\ntext = "caf\xe9"\nkind = "no_defects_remain"\n')
    with pytest.raises(ConfigError) as ei:
        load_claims(p)
    assert ei.value.line == 3


@settings(max_examples=60, deadline=None)
@given(ids=st.lists(st.from_regex(r"[a-z][a-z0-9-]{0,10}", fullmatch=True), min_size=1,
                    max_size=5, unique=True),
       threshold=st.floats(0, 1, allow_nan=False),
       blank=st.integers(0, 3))
def test_round_trip_of_generated_files(ids, threshold, blank):
    parts = []
    for i in ids:
        parts.append(f'[[claim]]\nid = "{i}"\n' + "\n" * blank +
                     f'kind = "at_least"\nmetric = "review_coverage"\nthreshold = {threshold!r}\n')
    cf = parse_claims("\n".join(parts), "g.toml")
    assert [c.id for c in cf.claims] == ids
    assert all(c.params["threshold"] == threshold for c in cf.claims)
    # every claim's recorded line is its [[claim]] header
    lines = "\n".join(parts).splitlines()
    assert all(lines[c.line - 1] == "[[claim]]" for c in cf.claims)


@pytest.mark.parametrize("value", ["-1", "0", "inf", "nan"])
def test_lengths_of_time_must_be_positive_and_finite(value):
    """``horizon_days`` and ``window_years`` name a span of time: zero, negative, infinite
    or NaN spans are usage mistakes (exit 2 in check and report), not undecidable data."""
    for key in ("horizon_days", "window_years"):
        text = ('[[claim]]\nid = "s"\nkind = "lifetimes_shortened_at"\ndate = "policy"\n'
                f"{key} = {value}\n")
        with pytest.raises(ConfigError, match=rf"c.toml:5, key '{key}'.*positive number"):
            parse_claims(text, "c.toml")
