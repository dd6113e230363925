"""Incremental mining equals mining once; rewrites and interruptions are handled."""
from __future__ import annotations

import pandas as pd
import pytest

from procmetrics.errors import ConfigError, HistoryRewritten
from procmetrics.mine import MineOptions, mine_repository
from procmetrics.store import open_store
from procmetrics.store.tables import READERS, read_table
from procmetrics.store.writer import StoreWriter
from tests.git_support import ALICE, BOB, CAROL, when

SKIP = {"mining_runs"}          # provenance differs by design (one run vs several)


def tables(store) -> dict[str, pd.DataFrame]:
    engine = open_store(store)
    out = {}
    for name in READERS:
        if name in SKIP:
            continue
        df = read_table(engine, name)
        if name == "repositories":
            df = df.drop(columns=["path"])
        out[name] = df.reset_index(drop=True)
    engine.dispose()
    return out


def assert_same_store(a, b) -> None:
    ta, tb = tables(a), tables(b)
    for name in ta:
        pd.testing.assert_frame_equal(ta[name], tb[name], obj=name)


def opts(**kw) -> MineOptions:
    return MineOptions(progress=False, repo_name="proj", **kw)


def first_part(h):
    h.commit("core: start\n", files={"core/a.c": "a\n", "README": "r\n"}, date=when(0, "+0100"),
             name="start")
    bug = h.commit("core: add bug\n", files={"core/a.c": "a\nbug\n"}, author=BOB,
                   date=when(1, "-0400"), name="bug")
    h.branch("side")
    h.checkout("side")
    h.commit("side: helper\n", files={"side/h.c": "h\n"}, author=CAROL, date=when(2),
             name="helper")
    h.checkout("main")
    h.commit("pr: amended later\n", files={"pr.txt": "p\n"}, date=when(2.5), name="pr")
    h.git("update-ref", "refs/pull/1/head", h.ids["pr"])
    h.git("reset", "-q", "--hard", bug)
    h.commit(f"core: fix\n\nFixes: {bug[:12]} (\"core: add bug\")\n"
             f"Fixes: {h.ids['helper'][:12]} (\"side: helper\")\n"
             f"Fixes: {h.ids['pr'][:12]} (\"pr: amended later\")\n"
             "Signed-off-by: Alice Example <alice@example.org>\n",
             files={"core/a.c": "a\nfixed\n"}, date=when(3, "+0200"), name="fix1")


def second_part(h):
    h.merge("side", date=when(4), name="merge_side")
    h.commit(f"core: more\n\nReviewed-by: Bob Sample <bob@example.net>\n",
             files={"core/b.c": "b\n"}, author=ALICE, date=when(5, "+0530"), name="more")
    h.tag("v2", message="two", date=when(6))


def test_incremental_equals_once(git_history, tmp_path):
    h = git_history()
    first_part(h)
    twice, once = tmp_path / "twice.sqlite", tmp_path / "once.sqlite"
    s1 = mine_repository(h.path, store=twice, options=opts())
    fl = read_table(open_store(twice), "fix_links").set_index("ref_hash")
    # reachable on a branch but not mined yet -> resolved, no introducer dates
    assert fl.loc[h.ids["helper"][:12], "status"] == "resolved"
    assert pd.isna(fl.loc[h.ids["helper"][:12], "intro_author_date"])
    assert fl.loc[h.ids["pr"][:12], "status"] == "unresolved"      # only a pull-request ref
    second_part(h)
    s2 = mine_repository(h.path, store=twice, options=opts())
    assert s2.incremental and s2.base_hash == s1.head_hash and s2.new_commits == 3
    s3 = mine_repository(h.path, store=twice, options=opts())
    assert s3.new_commits == 0
    mine_repository(h.path, store=once, options=opts())
    assert_same_store(twice, once)
    fl = read_table(open_store(twice), "fix_links").set_index("ref_hash")
    assert fl.loc[h.ids["helper"][:12], "intro_author_date"].timestamp() > 0


def test_rewritten_history(git_history, tmp_path):
    h = git_history()
    first_part(h)
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=opts())
    h.git("reset", "-q", "--hard", h.ids["bug"])
    h.commit("core: another fix\n", files={"core/a.c": "x\n"}, date=when(9))
    with pytest.raises(HistoryRewritten, match="not an ancestor"):
        mine_repository(h.path, store=store, options=opts())
    mine_repository(h.path, store=store, options=opts(rewrite_policy="remine"))
    once = tmp_path / "once.sqlite"
    mine_repository(h.path, store=once, options=opts())
    assert_same_store(store, once)
    runs = read_table(open_store(store), "mining_runs")
    assert list(runs["status"]) == ["superseded", "complete"]   # refusal starts no run


def test_changed_content_options_are_refused(git_history, tmp_path):
    h = git_history()
    first_part(h)
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=opts(line_counts=False))
    with pytest.raises(ConfigError, match="line_counts"):
        mine_repository(h.path, store=store, options=opts())
    mine_repository(h.path, store=store, options=opts(rewrite_policy="remine"))
    once = tmp_path / "once.sqlite"
    mine_repository(h.path, store=once, options=opts())
    assert_same_store(store, once)


class Boom(RuntimeError):
    pass


def interrupt_second_run(h, store, monkeypatch, hard: bool) -> None:
    """Mine the first part, then a run over more commits that dies in its third batch
    (``hard``: killed, so it never records the failure)."""
    first_part(h)
    mine_repository(h.path, store=store, options=opts(batch_size=2))
    second_part(h)
    for i in range(5):
        h.commit(f"core: step {i}\n\nFixes: {h.ids['more'][:12]}\n", files={"core/s.c": f"{i}\n"},
                 date=when(7 + i))
    run_dying_in_batch(h, store, monkeypatch, 3, hard=hard)


def run_dying_in_batch(h, store, monkeypatch, n: int, *, hard: bool = False) -> None:
    """A run of two-commit batches that dies writing its ``n``-th batch (``hard``: killed,
    so it never records the failure)."""
    real = StoreWriter.write_batch
    calls = {"n": 0}

    def flaky(self, *a, **kw):
        calls["n"] += 1
        if calls["n"] == n:
            raise Boom("disk on fire")
        return real(self, *a, **kw)
    monkeypatch.setattr(StoreWriter, "write_batch", flaky)
    if hard:   # a killed process never records the failure
        monkeypatch.setattr(StoreWriter, "fail_run", lambda self, run_id, message: None)
    with pytest.raises(Boom):
        mine_repository(h.path, store=store, options=opts(batch_size=2))
    monkeypatch.undo()


@pytest.mark.parametrize("hard", [False, True])
def test_interrupted_run_then_clean_result(git_history, tmp_path, monkeypatch, hard):
    """A run dying after its first batch leaves a store the next run repairs."""
    h = git_history()
    store = tmp_path / "s.sqlite"
    interrupt_second_run(h, store, monkeypatch, hard)
    engine = open_store(store)
    assert list(read_table(engine, "mining_runs")["status"]) == \
        ["complete", "running" if hard else "failed"]
    with engine.connect() as conn:                         # two batches landed ...
        stored = conn.exec_driver_sql("SELECT count(*) FROM git_commit").scalar()
    visible = len(read_table(engine, "commits"))
    assert stored > visible > 0   # ... but the tidy tables show complete runs only
    s = mine_repository(h.path, store=store, options=opts(batch_size=2))
    assert len(s.cleaned_runs) == 1
    once = tmp_path / "once.sqlite"
    mine_repository(h.path, store=once, options=opts())
    assert_same_store(store, once)


def test_history_cut_into_parts_gives_the_same_store(sample_history, tmp_path, monkeypatch):
    """Invariance: mining through several git processes (parts of the first-parent
    chain) stores exactly what one process stores; the parts cover the history once."""
    import procmetrics.mine.miner as miner
    from procmetrics.mine.git import GitRepo
    git = GitRepo.open(sample_history.path)
    tip = git.resolve_commit("HEAD")
    parts = miner.history_parts(git, tip, None, per_part=3)
    assert len(parts) > 2
    seen = []
    for part_tip, excluded in parts:
        seen += sample_history.git("rev-list", part_tip, *[f"^{e}" for e in excluded]).split()
    assert sorted(seen) == sorted(sample_history.git("rev-list", "HEAD").split())
    one, many = tmp_path / "one.sqlite", tmp_path / "many.sqlite"
    mine_repository(sample_history.path, store=one, options=MineOptions(progress=False))
    monkeypatch.setattr(miner, "COMMITS_PER_GIT_PROCESS", 2)
    mine_repository(sample_history.path, store=many, options=MineOptions(progress=False))
    assert_same_store(one, many)


def test_new_maintainers_blob_after_an_interrupted_run_maps_each_touched_path(
        git_history, tmp_path, monkeypatch):
    """A new MAINTAINERS blob maps every touched path again, taking the paths from the
    stored mapping plus the run's new ones (no scan of every file change). After an
    interrupted run whose commits touched new paths, the mapped paths are exactly the
    paths ``git log --name-only`` lists (git plumbing as the oracle), and the store
    equals a store mined once."""
    h = git_history()
    first_part(h)
    h.commit("maint: sections\n", files={"MAINTAINERS": "CORE\nF:\tcore/\n\nSIDE\nF:\tside/\n"},
             date=when(3.5))
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=opts(batch_size=2))
    second_part(h)
    h.commit("net: new area\n", files={"net/x.c": "x\n", "core/a.c": "a\nnet\n"},
             date=when(6.5))
    h.commit("maint: net section\n",
             files={"MAINTAINERS": "CORE\nF:\tcore/\n\nNET\nF:\tnet/\nF:\tcore/a.c\n"},
             date=when(6.8))
    run_dying_in_batch(h, store, monkeypatch, 2)
    s = mine_repository(h.path, store=store, options=opts(batch_size=2))
    assert len(s.cleaned_runs) == 1 and s.mapping_source.startswith("MAINTAINERS@")
    engine = open_store(store)
    with engine.connect() as conn:
        mapped = set(conn.exec_driver_sql("SELECT DISTINCT path FROM path_subsystem").scalars())
    listed = set(h.git("log", "--format=", "--name-only", "-M", "--diff-merges=first-parent",
                       "HEAD").split())
    assert mapped == listed and "net/x.c" in mapped
    cs = read_table(engine, "commit_subsystems")
    # the section the new blob dropped maps nothing any more: its paths are remapped
    assert set(cs["subsystem"]) == {"NET", "CORE", "(unmapped)"}
    assert set(cs.loc[cs["hash"] == h.ids["helper"], "subsystem"]) == {"(unmapped)"}
    once = tmp_path / "once.sqlite"
    mine_repository(h.path, store=once, options=opts())
    assert_same_store(store, once)


def _checked_refs(monkeypatch) -> list[set[str]]:
    """The references each later resolution checks, run by run (a spy on the store's
    prefix lookups, which every checked reference goes through)."""
    seen: list[set[str]] = []
    real = StoreWriter.stored_matches

    def spy(self, repo_id, refs, full_len, limit=2):
        seen.append(set(refs))
        return real(self, repo_id, refs, full_len, limit)
    monkeypatch.setattr(StoreWriter, "stored_matches", spy)
    return seen


def test_links_checked_again_only_when_the_reachable_history_changes_them(
        git_history, tmp_path, monkeypatch):
    """Each run stores the tips its link statuses were resolved against; a later run
    checks only the links the commits new to the reachable history (and its own) can
    change, and every unsettled link again when history was lost (a branch deleted).
    Oracle at every step: a store mined once from the same clone (which resolves every
    link afresh), and which references reach the store's prefix lookup."""
    h = git_history()
    h.commit("core: start\n", files={"core/a.c": "a\n"}, date=when(0), name="start")
    h.branch("topic")
    h.checkout("topic")
    h.commit("topic: later merged\n", files={"t.c": "t\n"}, date=when(1), name="later")
    h.branch("gone", h.ids["start"])
    h.checkout("gone")
    h.commit("gone: dropped branch\n", files={"g.c": "g\n"}, date=when(1.5), name="dropped")
    h.checkout("main")
    h.git("branch", "-D", "topic")          # "later" is unreachable for now
    nothing = "0123abcd" * 5                 # a hash no object has
    h.commit(f"core: fix\n\nFixes: {h.ids['later'][:12]}\nFixes: {h.ids['dropped'][:12]}\n"
             f"Fixes: {nothing[:12]}\n", files={"core/a.c": "b\n"}, date=when(2))
    store = tmp_path / "s.sqlite"
    seen = _checked_refs(monkeypatch)

    def step(*, compare: bool = True) -> tuple[dict[str, tuple], set[str]]:
        """Mine again; the links' (status, introducer) and the references checked."""
        seen.clear()
        mine_repository(h.path, store=store, options=opts())
        asked = set().union(*seen)
        if compare:
            once = tmp_path / f"once{h.rev()[:8]}.sqlite"
            mine_repository(h.path, store=once, options=opts())
            assert_same_store(store, once)
        fl = read_table(open_store(store), "fix_links")
        return {r.ref_hash: (r.status, r.introducer_hash) for r in fl.itertuples()}, asked

    later, dropped = h.ids["later"], h.ids["dropped"]
    status, asked = step(compare=False)
    assert asked >= {later[:12], dropped[:12], nothing[:12]}
    assert status[later[:12]] == ("unresolved", None)
    assert status[dropped[:12]] == ("resolved", dropped)
    # 1. nothing new to the history but the run's own commit: nothing old is asked again
    h.commit("core: more\n", files={"core/b.c": "b\n"}, date=when(3))
    assert step()[1] == set()
    # 2. the topic branch comes back: "later" is new to the reachable history
    h.branch("topic", later)
    h.commit("core: again\n", files={"core/b.c": "c\n"}, date=when(4))
    status, asked = step()
    assert asked == {later[:12]} and status[later[:12]] == ("resolved", later)
    # 3. merged: the target is stored now (its dates appear), asked again once
    h.merge("topic", date=when(5))
    assert step()[1] == {later[:12]}
    # 4. the branch holding "dropped" is deleted: history was lost, everything unsettled
    # is checked again and the reference no longer resolves
    h.git("branch", "-D", "gone")
    h.commit("core: last\n", files={"core/b.c": "d\n"}, date=when(6))
    status, asked = step()
    assert {dropped[:12], nothing[:12]} <= asked
    assert status[dropped[:12]] == ("unresolved", None)


def test_a_failed_run_after_resolution_makes_the_next_run_check_every_unsettled_link(
        git_history, tmp_path, monkeypatch):
    """The tips are trusted only when the run that recorded them completed."""
    h = git_history()
    h.commit("core: start\n", files={"core/a.c": "a\n"}, date=when(0))
    nothing = "0123abcd" * 5
    h.commit(f"core: fix\n\nFixes: {nothing[:12]}\n", files={"core/a.c": "b\n"},
             date=when(1))
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=opts())
    h.commit("core: more\n", files={"core/b.c": "b\n"}, date=when(2))
    from procmetrics.mine import miner

    def dies(*a, **kw):
        raise RuntimeError("killed after resolving")
    monkeypatch.setattr(miner.StoreWriter, "replace_tags", dies)
    with pytest.raises(RuntimeError):
        mine_repository(h.path, store=store, options=opts())
    monkeypatch.undo()
    seen = _checked_refs(monkeypatch)
    mine_repository(h.path, store=store, options=opts())
    assert nothing[:12] in set().union(*seen)


MAINT_BEFORE = ("CORE\nF:\tcore/\nX:\tcore/gen/\n\nNET\nF:\tnet/\n\nDOCS\nF:\tdocs/\n\n"
                "DRIVERS\nF:\tdrivers/\nN:\t[-_]usb\n\nOLD\nF:\told/\n")
MAINT_AFTER = ("CORE\nF:\tcore/\n\nNETWORKING\nF:\tnet/\n\nDOCS\nF:\tdocs/\n\n"
               "DRIVERS\nF:\tdrivers/\nN:\t[-_]usb\n\nUSB\nN:\tusb\n")


def test_a_new_maintainers_blob_maps_again_only_the_paths_a_changed_section_hits(
        git_history, tmp_path, monkeypatch):
    """Sections renamed (NET), dropped (OLD), added (USB, by N: regex) or with a changed
    exclusion (CORE) are the changed ones; the paths they hit, before or after, are mapped
    again and no other. Oracle: the store equals one mined once with the new file, and
    the paths mapped again are those ``git log --name-only`` lists under the changed
    sections' folders (plus the ones the new regex hits)."""
    h = git_history()
    files = {"core/a.c": "a\n", "core/gen/t.c": "t\n", "net/n.c": "n\n", "docs/d.txt": "d\n",
             "drivers/x-usb.c": "x\n", "drivers/pci.c": "p\n", "old/o.c": "o\n",
             "misc/usbtool.c": "u\n", "misc/other.c": "m\n", "MAINTAINERS": MAINT_BEFORE}
    h.commit("start\n", files=files, date=when(0))
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=opts())
    h.commit("maint: reorganise\n", files={"MAINTAINERS": MAINT_AFTER, "docs/e.txt": "e\n"},
             date=when(1))
    from procmetrics.mine.subsystems import PathMapper
    mapped: list[str] = []
    real = PathMapper.map_many

    def spy(self, paths):
        if self.kind == "maintainers":
            mapped.extend(paths)
        return real(self, paths)
    monkeypatch.setattr(PathMapper, "map_many", spy)
    mine_repository(h.path, store=store, options=opts())
    monkeypatch.undo()
    # hit by a changed section: CORE (exclusion), NET(WORKING), OLD, USB (N: usb);
    # docs/e.txt is new to the store; DOCS, DRIVERS' own entries and misc/other.c unchanged
    assert sorted(mapped) == ["core/a.c", "core/gen/t.c", "docs/e.txt", "drivers/x-usb.c",
                              "misc/usbtool.c", "net/n.c", "old/o.c"]
    once = tmp_path / "once.sqlite"
    mine_repository(h.path, store=once, options=opts())
    assert_same_store(store, once)
    cs = read_table(open_store(store), "commit_subsystems")
    assert {"NETWORKING", "USB", "CORE"} <= set(cs["subsystem"])
    assert not {"NET", "OLD"} & set(cs["subsystem"])


def test_a_maintainers_blob_git_no_longer_has_maps_every_path_again(
        git_history, tmp_path, monkeypatch):
    """Without the stored mapping's blob (a partial or pruned clone: here the stored
    source names a blob id no object has) there is nothing to compare with: every
    touched path is mapped again, and the store equals one mined once."""
    h = git_history()
    h.commit("start\n", files={"core/a.c": "a\n", "net/n.c": "n\n",
                               "MAINTAINERS": MAINT_BEFORE}, date=when(0))
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=opts())
    h.commit("maint\n", files={"MAINTAINERS": MAINT_AFTER}, date=when(1))
    engine = open_store(store)
    with engine.begin() as conn:
        conn.exec_driver_sql("UPDATE repository SET mapping_source = 'MAINTAINERS@' || "
                             "'0123456789abcdef0123456789abcdef01234567'")
    engine.dispose()
    from procmetrics.mine.subsystems import PathMapper
    mapped: list[str] = []
    real = PathMapper.map_many

    def spy(self, paths):
        mapped.extend(paths)
        return real(self, paths)
    monkeypatch.setattr(PathMapper, "map_many", spy)
    mine_repository(h.path, store=store, options=opts())
    monkeypatch.undo()
    assert sorted(mapped) == ["MAINTAINERS", "core/a.c", "net/n.c"]
    once = tmp_path / "once.sqlite"
    mine_repository(h.path, store=once, options=opts())
    assert_same_store(store, once)
