"""Credentials in a store URL never reach stderr or manifest.json: the user-info
password and secret query parameters (password, sslpassword, token) are masked."""
from __future__ import annotations

import pytest

from procmetrics.textsafe import mask_url, scrub_secrets
from tests.robustness.robust_support import assert_one_line_error


@pytest.mark.parametrize("url, want", [
    ("postgresql+psycopg://bob:pw@h:5432/db", "postgresql+psycopg://bob:***@h:5432/db"),
    ("postgresql+psycopg://bob@h/db?password=q1&sslmode=require&sslpassword=k2&token=t3",
     "postgresql+psycopg://bob@h/db?password=***&sslmode=require&sslpassword=***&token=***"),
    ("postgresql://h/db?PassWord=x", "postgresql://h/db?PassWord=***"),
    ("postgresql://bob@h/db?application_name=a@b", "postgresql://bob@h/db?application_name=a@b"),
    ("sqlite:////tmp/s.sqlite", "sqlite:////tmp/s.sqlite"),
])
def test_mask_url(url, want):
    assert mask_url(url) == want


def test_scrub_removes_raw_and_decoded_secrets():
    url = "postgresql://bob:p%40ss@h/db?token=tok9"
    assert scrub_secrets("auth failed for p@ss, p%40ss, tok9", url) == \
        "auth failed for ***, ***, ***"


def test_query_password_never_reaches_stderr(cli):
    url = ("postgresql+psycopg://bob@127.0.0.1:1/x?password=s3cr3t-q&sslpassword=k3y-q"
           "&token=t0k-q")
    r = cli("export", "--table", "commits", "--store", url)
    assert r.code == 5
    assert_one_line_error(r.err, "password=***")
    for secret in ("s3cr3t-q", "k3y-q", "t0k-q"):
        assert secret not in r.err + r.out
