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
from dataclasses import dataclass
from typing import Iterable, Iterator, Sequence

from procmetrics.errors import DataQualityWarning, GitFailed

FIELDS = ("%H", "%P", "%aN", "%aE", "%ad", "%cN", "%cE", "%cd", "%e", "%s", "%B")
LOG_FORMAT = "%x01" + "%x00".join(FIELDS)
N_FIELDS = len(FIELDS)

_RAW_RE = re.compile(rb"^\n?:(\d+) (\d+) ([0-9a-f]+) ([0-9a-f]+) ([A-Z])(\d*)$")
_NUM_RE = re.compile(rb"^(\d+|-)\t(\d+|-)\t(.*)$", re.S)
_HASH_RB = rb"(?:[0-9a-f]{64}|[0-9a-f]{40})"
_HASHES_RE = re.compile(rb"^" + _HASH_RB + rb"(?: " + _HASH_RB + rb")*$")


@dataclass(frozen=True, slots=True)
class FileEntry:
    path: str
    old_path: str | None
    change_type: str
    lines_added: int | None
    lines_deleted: int | None
    is_binary: bool | None


@dataclass(frozen=True, slots=True)
class LogCommit:
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
             merge_files: str, since: int | None, until: int | None) -> list[str]:
    """The ``git log`` argv (after ``git``) for commits reachable from ``tip`` and from
    none of ``base`` (one hash or several)."""
    args = ["log", "-z", f"--format={LOG_FORMAT}", "--date=raw", "--encoding=UTF-8",
            "--no-color", "--no-notes", "--no-show-signature", "--no-ext-diff",
            "--no-textconv", "--root", "--raw", "-M",
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


def tokens(chunks: Iterable[bytes]) -> Iterator[bytes]:
    """NUL-separated tokens of a byte stream (the last empty token is dropped)."""
    rest = b""
    for chunk in chunks:
        parts = (rest + chunk).split(b"\0") if rest else chunk.split(b"\0")
        rest = parts.pop()
        yield from parts
    if rest:
        yield rest


def _need(toks: Iterator[bytes]) -> bytes:
    tok = next(toks, None)
    if tok is None:
        raise GitFailed("git log output ended in the middle of a commit")
    return tok


def parse_log(chunks: Iterable[bytes]) -> Iterator[LogCommit]:
    """Parse the stream written by ``git log`` with :func:`log_args`."""
    toks = tokens(chunks)
    pending: bytes | None = next(toks, None)
    while pending is not None:
        head = pending
        if not head.startswith(b"\x01"):
            raise GitFailed(f"unexpected git log output near {head[:60]!r}")
        fields = [head[1:]]
        for _ in range(N_FIELDS - 1):
            fields.append(_need(toks))
        raws: list[tuple[str, str, str | None]] = []
        nums: list[tuple[int | None, int | None, bool]] = []
        pending = next(toks, None)
        while pending is not None and not pending.startswith(b"\x01"):
            m = _RAW_RE.match(pending)
            if m:
                status = m.group(5).decode("ascii")
                first = decode(_need(toks))[0]
                if status in "RC":
                    raws.append((status, decode(_need(toks))[0], first))
                else:
                    raws.append((status, first, None))
            else:
                n = _NUM_RE.match(pending)
                if n is None:
                    raise GitFailed(f"unexpected git log output near {pending[:60]!r}")
                if not n.group(3):      # rename: old and new path follow
                    _need(toks)
                    _need(toks)
                binary = n.group(1) == b"-"
                nums.append((None if binary else int(n.group(1)),
                             None if binary else int(n.group(2)), binary))
            pending = next(toks, None)
        yield _commit(fields, raws, nums)


def _commit(f: list[bytes], raws: list[tuple[str, str, str | None]],
            nums: list[tuple[int | None, int | None, bool]]) -> LogCommit:
    if nums and len(nums) != len(raws):
        raise GitFailed(f"git log gave {len(raws)} raw but {len(nums)} numstat entries "
                        f"for {f[0].decode('ascii', 'replace')}")
    files = []
    for i, (status, path, old) in enumerate(raws):
        if nums:
            added, deleted, binary = nums[i]
        else:
            added = deleted = binary = None
        files.append(FileEntry(path, old, status, added, deleted, binary))
    if not _HASHES_RE.match(f[0]) or (f[1] and not _HASHES_RE.match(f[1])):
        raise GitFailed(f"unexpected git log output near {f[0][:60]!r}")
    at_ao, ct_co = parse_raw_date_or_none(f[4]), parse_raw_date_or_none(f[7])
    if at_ao is None or ct_co is None:
        # a malformed ident line (only writable with hash-object --literally):
        # git prints no date; keep the commit, use its other date (or 0) and say so
        warnings.warn("a commit has an author or committer date git cannot read; its "
                      "other date (or 1970-01-01 when both are unreadable) is stored",
                      DataQualityWarning, stacklevel=2)
        at_ao = at_ao or ct_co or (0, 0)
        ct_co = ct_co or at_ao
    (at, ao), (ct, co) = at_ao, ct_co
    message, ok = decode(f[10])
    return LogCommit(
        hash=f[0].decode("ascii"), parents=tuple(f[1].decode("ascii").split()),
        author_name=decode(f[2])[0], author_email=decode(f[3])[0],
        author_time=at, author_offset_min=ao,
        committer_name=decode(f[5])[0], committer_email=decode(f[6])[0],
        committer_time=ct, committer_offset_min=co,
        encoding=decode(f[8])[0], subject=decode(f[9])[0], message=message,
        message_was_utf8=ok, files=tuple(files))
