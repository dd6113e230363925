"""A Ctrl-C that a library swallowed (Python ignores exceptions raised in finalizers)
still stops a mining run before it is marked complete: the run stays 'running', to be
cleaned by the next run, instead of ending as if nobody had pressed Ctrl-C."""
from __future__ import annotations

import os
import signal

import pytest

from procmetrics import interrupts
from procmetrics.store import open_store
from procmetrics.store.writer import StoreWriter
from procmetrics.store.tables import read_table


def test_check_raises_after_a_swallowed_sigint() -> None:
    with interrupts.recorded():
        try:
            os.kill(os.getpid(), signal.SIGINT)      # the handler runs in this, the main thread
        except KeyboardInterrupt:
            pass                                     # the library that swallows it
        with pytest.raises(KeyboardInterrupt):
            interrupts.check()
    interrupts.check()                               # outside: forgotten, no raise


def test_a_run_is_not_completed_after_a_swallowed_sigint(tmp_path) -> None:
    engine = open_store(tmp_path / "s.sqlite")
    try:
        book = StoreWriter(engine)
        repo_id = book.ensure_repository("fw", str(tmp_path))
        run_id = book.start_run(repo_id, ref="HEAD", head_hash="0" * 40, base_hash=None,
                                is_shallow=False, options_json="{}", versions_json="{}")
        with interrupts.recorded():
            try:
                os.kill(os.getpid(), signal.SIGINT)
            except KeyboardInterrupt:
                pass
            with pytest.raises(KeyboardInterrupt):
                book.complete_run(run_id, repo_id, tip_hash="0" * 40, tip_ref="HEAD",
                                  path=str(tmp_path), remote_url=None, is_shallow=False,
                                  mapping_kind="path-prefix", mapping_source="1",
                                  counts={}, message=None)
        runs = read_table(engine, "mining_runs")
        assert runs["status"].tolist() == ["running"]
    finally:
        engine.dispose()
