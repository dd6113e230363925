"""The report says whether git merged identities through a .mailmap while mining.

Reference: git itself (``git log --format=%aE`` with and without the .mailmap).
"""
from __future__ import annotations

from procmetrics.mine import MineOptions, mine_repository
from procmetrics.store.repodata import load_store_data
from procmetrics.analyse.measures.quality import identities
from procmetrics.report.sec_scope import _identity_words
from procmetrics.store import open_store
from tests.git_support import when


def _mine(h, tmp_path, name):
    store = tmp_path / f"{name}.sqlite"
    mine_repository(h.path, store=store, options=MineOptions(progress=False, repo_name=name))
    return identities(load_store_data(open_store(store), name))


def test_mailmap_presence_is_recorded_and_worded(git_history, tmp_path):
    h = git_history()
    h.commit("a", files={"a.c": "1\n"}, author=("Ada Lind", "ada@old.example.org"), date=when(1))
    h.commit("b", files={"a.c": "2\n"}, author=("Ada Lind", "ada@new.example.org"), date=when(2))
    without = _mine(h, tmp_path, "plain")
    assert without["identity_mapping"] == "none"
    assert "no .mailmap" in _identity_words(without["identity_mapping"])
    assert without["n_emails"] == len(set(h.git("log", "--format=%ae").split()))  # 2

    h.commit("mailmap", files={".mailmap": "Ada Lind <ada@new.example.org> "
                                           "<ada@old.example.org>\n"},
             author=("Ada Lind", "ada@new.example.org"), date=when(3))
    mapped = _mine(h, tmp_path, "mapped")
    assert mapped["identity_mapping"].startswith(".mailmap@")
    assert "merged by the repository's own .mailmap" in _identity_words(mapped["identity_mapping"])
    # oracle: git reading the repository as a bare one (mailmap.blob = HEAD:.mailmap)
    bare_view = h.git("--git-dir", str(h.path / ".git"), "-c", "core.bare=true",
                      "log", "--format=%aE")
    assert mapped["n_emails"] == len(set(bare_view.split())) == 1

    # an uncommitted .mailmap in the work tree does not change what is mined
    (h.path / ".mailmap").write_text("Someone Else <other@example.org> <ada@new.example.org>\n")
    again = _mine(h, tmp_path, "worktree")
    assert again["n_emails"] == 1 and again["n_names"] == 1
    assert again["identity_mapping"] == mapped["identity_mapping"]


def test_a_changed_mailmap_warns_or_remines_so_identities_stay_consistent(git_history,
                                                                          tmp_path):
    import warnings

    import pytest

    from procmetrics.errors import DataQualityWarning
    from procmetrics.store.tables import read_table
    h = git_history()
    h.commit("a", files={"a.c": "1\n"}, author=("Ada Lind", "ada@old.example.org"), date=when(1))
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=MineOptions(progress=False))
    h.commit("mailmap", files={".mailmap": "Ada Lind <ada@new.example.org> "
                                           "<ada@old.example.org>\n"},
             author=("Ada Lind", "ada@new.example.org"), date=when(2))
    with pytest.warns(DataQualityWarning, match="mailmap changed"):
        mine_repository(h.path, store=store, options=MineOptions(progress=False))
    emails = set(read_table(open_store(store), "commits")["author_email"])
    assert emails == {"ada@old.example.org", "ada@new.example.org"}   # old commit kept as was
    with warnings.catch_warnings():
        warnings.simplefilter("error", DataQualityWarning)
        h.commit("b", files={"a.c": "3\n"}, author=("Ada Lind", "ada@old.example.org"),
                 date=when(3))
        mine_repository(h.path, store=store,
                        options=MineOptions(progress=False, rewrite_policy="remine"))
    # now every commit is mapped like git maps it (oracle: git log %aE, bare view)
    emails = set(read_table(open_store(store), "commits")["author_email"])
    git_view = set(h.git("--git-dir", str(h.path / ".git"), "-c", "core.bare=true",
                         "log", "--format=%aE").split())
    assert emails == git_view == {"ada@new.example.org"}
