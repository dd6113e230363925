"""Read a repository's tags (name, peeled commit, date) with one for-each-ref pass."""
from __future__ import annotations

from procmetrics.mine.git import GitRepo
from procmetrics.mine.logstream import parse_raw_date_or_none
from procmetrics.store.writer import TagRow

_FORMAT = "%(refname)%00%(objecttype)%00%(objectname)%00%(taggerdate:raw)"


def read_tags(git: GitRepo) -> list[TagRow]:
    """Tags pointing (possibly through tag objects) at commits.

    The date is the tagger date of an annotated tag, else the peeled commit's
    committer date. Ref names cannot hold newlines, so records are lines and
    fields are NUL-separated. Tags of trees or blobs are skipped.
    """
    out = git._run(["for-each-ref", f"--format={_FORMAT}", "refs/tags"]).stdout
    records = []
    for line in out.split(b"\n"):
        if not line:
            continue
        ref, otype, oid, tdate = line.split(b"\0")
        records.append((ref.decode("utf-8", "replace")[len("refs/tags/"):],
                        otype.decode(), oid.decode(), tdate.decode().strip()))
    if not records:
        return []
    peeled = git.batch(["cat-file", "--batch-check=%(objectname) %(objecttype)"],
                       (f"{oid}^{{commit}}" for _, _, oid, _ in records))
    commits: dict[int, str] = {}
    for i, line in enumerate(peeled):
        parts = line.split()
        if len(parts) == 2 and parts[1] == "commit":
            commits[i] = parts[0]
    need_dates = sorted({commits[i] for i, r in enumerate(records)
                         if i in commits and not r[3]})
    dates: dict[str, tuple[int, int]] = {}
    if need_dates:
        for line in git.batch(["log", "--no-walk=unsorted", "--stdin", "--date=raw",
                               "--format=%H %cd"], need_dates):
            h, _, raw = line.partition(" ")
            when = parse_raw_date_or_none(raw.encode())     # None: a date git cannot read
            if when is not None:
                dates[h] = when
    tags = []
    for i, (name, otype, _oid, tdate) in enumerate(records):
        if i not in commits:
            continue
        when = (parse_raw_date_or_none(tdate.encode()) if tdate else None) or dates.get(commits[i])
        tags.append(TagRow(name, commits[i], when[0] if when else None,
                           when[1] if when else None, otype == "tag"))
    return tags
