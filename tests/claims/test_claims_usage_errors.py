"""User mistakes in claims are errors (exit 2, one line), not "undecidable" verdicts."""
from __future__ import annotations

import pandas as pd
import pytest

from procmetrics.claims.base import Claim, ClaimContext
from procmetrics.claims.reader import ClaimsFile
from procmetrics.claims.registry import evaluate_claims
from procmetrics.errors import ConfigError
from procmetrics.report.build import build_report
from procmetrics.report.model import ReportOptions
from procmetrics.store.repodata import StoreData
from tests.report.synth import synth


@pytest.fixture(scope="module")
def data():
    d = synth(seed=3)
    cs = pd.DataFrame({"repo": "synthrepo", "hash": d["commits"]["hash"],
                       "subsystem": "net"})
    return StoreData(d.repo, {**d.tables, "commit_subsystems": cs})


def _ctx(data, policy=None) -> ClaimContext:
    return ClaimContext(commits=data["commits"], trailers=data["trailers"],
                        fix_links=data["fix_links"],
                        commit_subsystems=data["commit_subsystems"], policy_date=policy)


POLICY_CLAIM = Claim("r", "x", "review_coverage_rose", {"date": "policy"}, line=4)
SUB_CLAIM = Claim("s", "x", "at_least", {"metric": "review_coverage", "threshold": 0.5,
                                         "subsystem": "nosuch"}, line=9)


def test_policy_without_date_is_an_error_naming_the_claim(data):
    with pytest.raises(ConfigError) as exc:
        evaluate_claims([POLICY_CLAIM], _ctx(data))
    assert exc.value.exit_code == 2
    assert "claim 'r' (line 4)" in str(exc.value) and "--policy-date" in str(exc.value)
    assert "\n" not in str(exc.value)


def test_unknown_subsystem_is_an_error_listing_the_known_ones(data):
    with pytest.raises(ConfigError, match=r"subsystem 'nosuch' does not exist in the store "
                                          r"\(known: net\)"):
        evaluate_claims([SUB_CLAIM], _ctx(data))


def test_errors_come_before_any_claim_is_judged(data, monkeypatch):
    import procmetrics.claims.registry as reg

    judged = []
    monkeypatch.setattr(reg, "evaluate_claim", lambda c, x: judged.append(c))
    ok = Claim("a", "x", "at_least", {"metric": "review_coverage", "threshold": 0.1})
    with pytest.raises(ConfigError):
        reg.evaluate_claims([ok, POLICY_CLAIM], _ctx(data))
    assert judged == []


def test_report_stops_at_once_on_the_same_mistakes(data):
    cf = ClaimsFile("c.toml", (POLICY_CLAIM,), "0" * 64)
    with pytest.raises(ConfigError, match="needs a policy date"):
        build_report(data, ReportOptions(), claims=cf)
    with pytest.raises(ConfigError, match="subsystem 'nosuch' does not exist"):
        build_report(data, ReportOptions(subsystems=("nosuch",)))
