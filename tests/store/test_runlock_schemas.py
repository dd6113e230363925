"""The PostgreSQL mining lock is per store: stores in two schemas of one database
(each numbering its repositories from 1) never block each other, while a second run of
the same repository in the same store is refused. Before the lock class was keyed by
the schema, two test workers mining 'team-b-fw' into separate schemas at the same time
failed with StoreBusy."""
from __future__ import annotations

import pytest
from sqlalchemy import create_engine

from procmetrics.errors import StoreBusy
from procmetrics.store.runlock import lock_class, repository_lock
from tests.pg_support import scratch_pg_url


def test_lock_class_is_a_signed_32_bit_number_per_schema() -> None:
    classes = {lock_class(f"pm_t_{i:04d}") for i in range(2000)}
    assert len(classes) == 2000                         # no collision among these
    assert all(-(1 << 31) <= c < (1 << 31) for c in classes)
    assert lock_class("public") == lock_class("public")


@pytest.mark.postgres
def test_stores_in_two_schemas_do_not_block_each_other() -> None:
    with scratch_pg_url("locka") as url_a, scratch_pg_url("lockb") as url_b:
        a1, a2, b = create_engine(url_a), create_engine(url_a), create_engine(url_b)
        try:
            with repository_lock(a1, 1, "team-b-fw"):
                with repository_lock(b, 1, "team-b-fw"):      # other store: goes on
                    pass
                with pytest.raises(StoreBusy):                # same store, same repository
                    with repository_lock(a2, 1, "team-b-fw"):
                        pass
                with repository_lock(a2, 2, "other"):         # same store, other repository
                    pass
            with repository_lock(a2, 1, "team-b-fw"):         # released with the run
                pass
        finally:
            for e in (a1, a2, b):
                e.dispose()
