"""Stream ``git log -z`` output and parse it in one pass (a generator).

One git process writes commit headers (NUL-separated fields of a custom
``--format``), its ``--raw`` entries and, when line counts are wanted, its
``--numstat`` entries; Python parses while git keeps producing (the pipe lets
the two run on two cores). Memory stays bounded: only the current chunk and
the current commit are held.

Layout of one commit in the stream (``-z``)::

    \\x01<H> \\0 <P> \\0 <aN> \\0 <aE> \\0 <ad raw> \\0 <cN> \\0 <cE> \\0 <cd raw> \\0
    <encoding> \\0 <subject> \\0 <body> \\0
    [\\n]:<mode> <mode> <sha> <sha> <status> \\0 <path> \\0 [<path2> \\0] ...   (raw)
    <added>\\t<deleted>\\t<path> \\0 | <added>\\t<deleted>\\t \\0 <old> \\0 <new> \\0 ...

Raw entries and numstat entries come in the same order, so the i-th numstat
entry belongs to the i-th raw entry. Merge commits carry no file entries unless
``merge_files="first-parent"``.
"""
from __future__ import annotations

import re
import warnings
from typing import Iterable, Iterator, NamedTuple, Sequence

from procmetrics.errors import DataQualityWarning, GitFailed
from procmetrics.store.writer import FileRow

FIELDS = ("%H", "%P", "%aN", "%aE", "%ad", "%cN", "%cE", "%cd", "%e", "%s", "%B")
LOG_FORMAT = "%x01" + "%x00".join(FIELDS)
N_FIELDS = len(FIELDS)

_RAW_RE = re.compile(rb"^\n?:(\d+) (\d+) ([0-9a-f]+) ([0-9a-f]+) ([A-Z])(\d*)$")
_NUM_RE = re.compile(rb"^(\d+|-)\t(\d+|-)\t(.*)$", re.S)
_HASH_RB = rb"(?:[0-9a-f]{64}|[0-9a-f]{40})"
_HASHES_RE = re.compile(rb"^" + _HASH_RB + rb"(?: " + _HASH_RB + rb")*$")


# One path a commit touches: the store's own row type, so rows pass through unchanged.
FileEntry = FileRow


class LogCommit(NamedTuple):
    hash: str
    parents: tuple[str, ...]
    author_name: str
    author_email: str
    author_time: int
    author_offset_min: int
    committer_name: str
    committer_email: str
    committer_time: int
    committer_offset_min: int
    encoding: str
    subject: str
    message: str
    message_was_utf8: bool
    files: tuple[FileEntry, ...]


def log_args(tip: str, base: str | Sequence[str] | None, *, line_counts: bool,
             merge_files: str, since: int | None, until: int | None,
             exact_renames: bool = False) -> list[str]:
    """The ``git log`` argv (after ``git``) for commits reachable from ``tip`` and from
    none of ``base`` (one hash or several). ``exact_renames``: renames only where the
    content is identical (``-M100%``: compares object ids, reads no file contents, as
    a partial clone without blobs needs)."""
    args = ["log", "-z", f"--format={LOG_FORMAT}", "--date=raw", "--encoding=UTF-8",
            "--no-color", "--no-notes", "--no-show-signature", "--no-ext-diff",
            "--no-textconv", "--root", "--raw", "-M100%" if exact_renames else "-M",
            "--diff-merges=" + ("first-parent" if merge_files == "first-parent" else "off")]
    if line_counts:
        args.append("--numstat")
    args += date_filter_args(since, until)
    args.append(tip)
    for b in ([base] if isinstance(base, str) else base or ()):
        args.append("^" + b)
    args.append("--")
    return args


def date_filter_args(since: int | None, until: int | None) -> list[str]:
    """Committer-date filters; ``--since-as-filter`` keeps walking past old commits."""
    out = []
    if since is not None:
        out.append(f"--since-as-filter=@{since}")
    if until is not None:
        out.append(f"--until=@{until}")
    return out


def decode(raw: bytes) -> tuple[str, bool]:
    """UTF-8 text, or Latin-1 (lossless byte mapping) when the bytes are not UTF-8."""
    try:
        return raw.decode("utf-8"), True
    except UnicodeDecodeError:
        return raw.decode("latin-1"), False


def parse_raw_date(raw: bytes) -> tuple[int, int]:
    stamp, _, tz = raw.decode("ascii").partition(" ")
    tz = tz.strip() or "+0000"
    sign = -1 if tz[0] == "-" else 1
    digits = tz.lstrip("+-").rjust(4, "0")
    return int(stamp), sign * (int(digits[:2]) * 60 + int(digits[2:4]))


def parse_raw_date_or_none(raw: bytes) -> tuple[int, int] | None:
    """:func:`parse_raw_date`, or None when git printed no readable date."""
    try:
        return parse_raw_date(raw)
    except (ValueError, IndexError):
        return None


def parse_log(chunks: Iterable[bytes]) -> Iterator[LogCommit]:
    """Parse the stream written by ``git log`` with :func:`log_args`.

    Each chunk is split on NUL once; commits are read from that token list by
    index. A commit is only parsed once the next commit's header (or the end of
    the stream) is in view, so chunk boundaries never change the result; the
    tokens of an unfinished commit are carried into the next round.
    """
    toks: list[bytes] = []
    pos = 0
    rest = b""
    wait = 0        # tokens an unfinished commit needs before it is tried again
    for chunk in chunks:
        if not chunk:
            continue
        parts = (rest + chunk).split(b"\0") if rest else chunk.split(b"\0")
        rest = parts.pop()
        toks = toks[pos:] + parts if pos < len(toks) else parts
        pos = 0
        if len(toks) < wait:    # a huge commit: retry after doubling, not every chunk
            continue
        while pos < len(toks):
            got = _next_commit(toks, pos, False)
            if got is None:
                wait = 2 * (len(toks) - pos)
                break
            commit, pos = got
            yield commit
    toks = toks[pos:] + ([rest] if rest else [])
    pos = 0
    while pos < len(toks):
        got = _next_commit(toks, pos, True)
        if got is None:     # pragma: no cover - final=True never gives None
            break
        commit, pos = got
        yield commit


def _ended() -> GitFailed:
    return GitFailed("git log output ended in the middle of a commit")


def _next_commit(toks: list[bytes], i: int, final: bool) -> tuple[LogCommit, int] | None:
    """The commit whose header is ``toks[i]`` and the index after it; None when more
    tokens are needed to know where it ends (``final``: the stream has ended)."""
    head = toks[i]
    if not head.startswith(b"\x01"):
        raise GitFailed(f"unexpected git log output near {head[:60]!r}")
    n = len(toks)
    j = i + N_FIELDS
    if j > n:
        if final:
            raise _ended()
        return None
    raws: list[tuple[str, str, str | None]] = []
    nums: list[tuple[int | None, int | None, bool]] = []
    raw_match, num_match = _RAW_RE.match, _NUM_RE.match
    while True:
        if j >= n:
            if not final:
                return None
            break
        tok = toks[j]
        if tok.startswith(b"\x01"):
            break
        m = raw_match(tok)
        if m:
            status = chr(m.group(5)[0])
            if status in "RC":
                if j + 2 >= n:
                    if final:
                        raise _ended()
                    return None
                raws.append((status, _text(toks[j + 2]), _text(toks[j + 1])))
                j += 3
            else:
                if j + 1 >= n:
                    if final:
                        raise _ended()
                    return None
                raws.append((status, _text(toks[j + 1]), None))
                j += 2
            continue
        m = num_match(tok)
        if m is None:
            raise GitFailed(f"unexpected git log output near {tok[:60]!r}")
        if not m.group(3):      # rename: old and new path follow
            if j + 2 >= n:
                if final:
                    raise _ended()
                return None
            j += 2
        j += 1
        if m.group(1) == b"-":
            nums.append((None, None, True))
        else:
            nums.append((int(m.group(1)), int(m.group(2)), False))
    fields = toks[i:i + N_FIELDS]
    fields[0] = head[1:]
    return _commit(fields, raws, nums), j


def _text(raw: bytes) -> str:
    """:func:`decode` without the flag."""
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        return raw.decode("latin-1")


def _date(raw: bytes) -> tuple[int, int] | None:
    """:func:`parse_raw_date_or_none`, with a fast path for ``<digits> <+|-><4 digits>``."""
    if len(raw) > 6 and raw[-6] == 32 and raw[-5] in b"+-" and raw[-4:].isdigit() \
            and raw[:-6].isdigit():
        off = int(raw[-4:-2]) * 60 + int(raw[-2:])
        return int(raw[:-6]), -off if raw[-5] == 45 else off
    return parse_raw_date_or_none(raw)


def _commit(f: list[bytes], raws: list[tuple[str, str, str | None]],
            nums: list[tuple[int | None, int | None, bool]]) -> LogCommit:
    if nums:
        if len(nums) != len(raws):
            raise GitFailed(f"git log gave {len(raws)} raw but {len(nums)} numstat entries "
                            f"for {f[0].decode('ascii', 'replace')}")
        files = tuple([FileEntry(path, old, status, *num)
                       for (status, path, old), num in zip(raws, nums)])
    else:
        files = tuple([FileEntry(path, old, status, None, None, None)
                       for status, path, old in raws])
    if not _HASHES_RE.match(f[0]) or (f[1] and not _HASHES_RE.match(f[1])):
        raise GitFailed(f"unexpected git log output near {f[0][:60]!r}")
    at_ao, ct_co = _date(f[4]), _date(f[7])
    if at_ao is None or ct_co is None:
        # a malformed ident line (only writable with hash-object --literally):
        # git prints no date; keep the commit, use its other date (or 0) and say so
        warnings.warn("a commit has an author or committer date git cannot read; its "
                      "other date (or 1970-01-01 when both are unreadable) is stored",
                      DataQualityWarning, stacklevel=3)
        at_ao = at_ao or ct_co or (0, 0)
        ct_co = ct_co or at_ao
    try:
        message, ok = f[10].decode("utf-8"), True
    except UnicodeDecodeError:
        message, ok = f[10].decode("latin-1"), False
    return LogCommit(
        f[0].decode("ascii"), tuple(f[1].decode("ascii").split()),
        _text(f[2]), _text(f[3]), at_ao[0], at_ao[1], _text(f[5]), _text(f[6]),
        ct_co[0], ct_co[1], _text(f[8]) if f[8] else "", _text(f[9]), message, ok, files)
