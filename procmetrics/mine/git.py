"""Run git read-only in a controlled environment (the only place git is started).

Every call is an argv list (never a shell). The environment drops inherited
``GIT_*`` variables and sets ``GIT_CONFIG_NOSYSTEM=1``,
``GIT_CONFIG_GLOBAL=/dev/null`` (so neither system nor user configuration can
change results or start programs), no pager, no terminal prompts, no optional
locks, no lazy fetches in partial clones and no replace refs or grafts. Command-line
``-c`` settings then pin what the repository's own config could change
(fsmonitor, external diff, textconv, signature display, diff algorithm,
rename limit, output encoding, hooks path) and mark the repository a
``safe.directory`` for this call only; the user's configuration is never
edited and nothing is written to the mined repository.
"""
from __future__ import annotations

import os
import queue
import re
import shutil
import subprocess
import tempfile
import threading
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Iterable, Iterator, Sequence

try:
    import fcntl
except ImportError:     # pragma: no cover - not POSIX
    fcntl = None  # type: ignore[assignment]

from procmetrics.errors import GitFailed, GitUnavailable, NotARepository, UnknownRef

MIN_GIT_VERSION = (2, 32)   # GIT_CONFIG_GLOBAL appeared in 2.32
CHUNK = 1 << 20
PIPE_SIZE = 1 << 20     # git's stdout pipe (Linux default 64 KiB)
READ_AHEAD = 32         # chunks of git output queued ahead of the consumer (<= 32 MiB)

_PINNED_CONFIG = (
    "core.fsmonitor=false", "core.hooksPath=/dev/null", "core.attributesFile=/dev/null",
    "core.pager=cat", "diff.external=", "diff.algorithm=myers", "diff.renameLimit=1000",
    "diff.relative=false", "log.showSignature=false", "i18n.logOutputEncoding=UTF-8",
    "color.ui=false", "protocol.allow=never", "gc.auto=0", "maintenance.auto=false",
    # files the repository's config could name for git to read: /dev/zero would hang it
    "mailmap.file=/dev/null", "diff.orderFile=/dev/null",
    # how much of a pack git maps at once: by default (64-bit) 1 GiB windows and no
    # practical limit on their total (32 TiB, git-config's documentation), and every page
    # read stays resident, so mining the benchmark's 1,000,000-commit history (a 2 GiB
    # pack) peaked at 1,841 and 1,837 MiB with git; 905 MiB with these bounds on every
    # git call (369 s against 334 and 359 s). Bounding only the log streams left the peak
    # at 1,836 MiB. What git prints does not change. See bench/HISTORY.md.
    "core.packedGitLimit=384m", "core.packedGitWindowSize=128m",
)


def git_environment(base: dict[str, str] | None = None) -> dict[str, str]:
    """The environment git runs in (inherited ``GIT_*`` variables removed)."""
    env = {k: v for k, v in (os.environ if base is None else base).items()
           if not k.startswith("GIT_") or k == "GIT_EXEC_PATH"}
    env.update({
        "GIT_CONFIG_NOSYSTEM": "1", "GIT_CONFIG_GLOBAL": "/dev/null",
        "GIT_ATTR_NOSYSTEM": "1", "GIT_TERMINAL_PROMPT": "0", "GIT_PAGER": "cat",
        "PAGER": "cat", "GIT_OPTIONAL_LOCKS": "0", "GIT_NO_LAZY_FETCH": "1",
        "GIT_NO_REPLACE_OBJECTS": "1", "LC_ALL": "C", "LANGUAGE": "C",
        # a path that cannot exist: info/grafts (which GIT_NO_REPLACE_OBJECTS does not
        # cover) is ignored too, so the mined parents are those in the commit objects
        "GIT_GRAFT_FILE": os.devnull + "/no-grafts",
        # no transport at all, whatever protocol.<name>.allow the repository sets: a
        # partial clone's lazy fetch (GIT_NO_LAZY_FETCH needs git >= 2.44) could
        # otherwise start an ext:: command named in the repository's config
        "GIT_ALLOW_PROTOCOL": "",
    })
    return env


def git_version() -> tuple[int, ...]:
    """Installed git's version; :class:`GitUnavailable` when missing or too old."""
    exe = shutil.which("git")
    if exe is None:
        raise GitUnavailable("git is not installed or not on PATH")
    try:
        out = subprocess.run([exe, "--version"], capture_output=True, env=git_environment(),
                             check=True, timeout=60).stdout.decode("ascii", "replace")
    except (OSError, subprocess.SubprocessError) as exc:
        raise GitUnavailable(f"cannot run git: {exc}") from exc
    m = re.search(r"(\d+)\.(\d+)(?:\.(\d+))?", out)
    if not m:
        raise GitUnavailable(f"cannot read git's version from {out.strip()!r}")
    version = tuple(int(x) for x in m.groups() if x is not None)
    if version[:2] < MIN_GIT_VERSION:
        raise GitUnavailable(
            f"git {'.'.join(map(str, version))} is too old; procmetrics needs git "
            f">= {'.'.join(map(str, MIN_GIT_VERSION))}")
    return version


@dataclass(frozen=True)
class GitRepo:
    """A repository opened read-only. Use :meth:`open`."""

    path: Path          # top level of the work tree, or the git directory when bare
    git_dir: Path
    is_bare: bool
    version: tuple[int, ...]
    # Once opened, git reads the repository like a bare one: nothing in the work tree
    # (an edited .mailmap or .gitattributes, uncommitted files) changes what is mined.
    # Identities are mapped by the .mailmap committed at this revision (HEAD by default).
    mailmap_rev: str | None = None
    # True when that .mailmap's blob is absent (a partial clone): identities unmapped
    mailmap_absent: bool = False

    def at_revision(self, rev: str) -> "GitRepo":
        """The same repository with identities mapped by ``rev``'s ``.mailmap``."""
        return replace(self, mailmap_rev=rev)

    def without_mailmap(self) -> "GitRepo":
        """The same repository with no identity mapping (its .mailmap blob is absent)."""
        return replace(self, mailmap_absent=True)

    # -- construction -------------------------------------------------------------------
    @classmethod
    def open(cls, path: str | os.PathLike[str]) -> "GitRepo":
        """Open ``path`` (the top of a work tree, or a bare/git directory)."""
        version = git_version()
        given = Path(path).expanduser()
        if not given.is_dir():
            raise NotARepository(f"{given}: no such folder")
        given = given.resolve()
        probe = cls(given, given, False, version)
        # never discover a repository above the folder the user named
        env = {"GIT_CEILING_DIRECTORIES": str(given.parent)}
        proc = probe._run(["rev-parse", "--is-bare-repository", "--absolute-git-dir"],
                          check=False, extra_env=env)
        if proc.returncode != 0:
            err = proc.stderr.decode("utf-8", "replace").strip()
            _explain_refusal(given, err)
            raise NotARepository(f"{given} is not a git repository (give the top-level "
                                 "folder of a clone, or a bare repository)")
        lines = proc.stdout.decode("utf-8", "surrogateescape").splitlines()
        is_bare = lines[0].strip() == "true"
        git_dir = Path(lines[1])
        top = given
        if not is_bare:
            proc = probe._run(["rev-parse", "--show-toplevel"], check=False, extra_env=env)
            if proc.returncode == 0:
                top = Path(proc.stdout.decode("utf-8", "surrogateescape").strip())
                if top != given:
                    raise NotARepository(
                        f"{given} is inside the repository at {top}; pass its top-level folder")
            else:   # e.g. the .git folder of a work tree: read it like a bare repository
                is_bare = True
        return cls(top, git_dir, is_bare, version, mailmap_rev="HEAD")

    # -- running ------------------------------------------------------------------------
    def argv(self, args: Sequence[str]) -> list[str]:
        isolated = self.mailmap_rev is not None   # opened: no work tree, tip's .mailmap
        cmd = ["git", "--no-pager", "--no-replace-objects",
               "-C", str(self.git_dir if isolated else self.path),
               "-c", f"safe.directory={self.path}", "-c", f"safe.directory={self.git_dir}"]
        if isolated:
            cmd += ["--git-dir", str(self.git_dir), "-c", "core.bare=true",
                    "-c", "mailmap.blob=" if self.mailmap_absent
                    else f"mailmap.blob={self.mailmap_rev}:.mailmap"]
        for item in _PINNED_CONFIG:
            cmd += ["-c", item]
        return cmd + list(args)

    def _run(self, args: Sequence[str], *, check: bool = True, input: bytes | None = None,
             extra_env: dict[str, str] | None = None) -> subprocess.CompletedProcess[bytes]:
        env = git_environment()
        if extra_env:
            env.update(extra_env)
        try:
            proc = subprocess.run(self.argv(args), capture_output=True, input=input, env=env,
                                  stdin=None if input is not None else subprocess.DEVNULL)
        except OSError as exc:
            raise GitUnavailable(f"cannot run git: {exc}") from exc
        if check and proc.returncode != 0:
            raise GitFailed(_failure(args, proc.returncode, proc.stderr))
        return proc

    def text(self, *args: str) -> str:
        """Run git and return its stdout decoded (UTF-8, undecodable bytes replaced)."""
        return self._run(args).stdout.decode("utf-8", "replace")

    def stream(self, args: Sequence[str]) -> Iterator[bytes]:
        """Yield git's stdout in chunks while git still runs (bounded memory).

        stderr goes to a temporary file so a chatty git can never block on a full
        pipe; a non-zero exit raises :class:`GitFailed` after the last chunk. When
        the consumer stops early, git is terminated. A reader thread keeps up to
        ``READ_AHEAD`` chunks queued, so git keeps writing while the consumer is
        busy (e.g. inside a database transaction) instead of stalling on a full pipe.
        """
        with tempfile.TemporaryFile() as err:
            try:
                proc = subprocess.Popen(self.argv(args), stdout=subprocess.PIPE, stderr=err,
                                        stdin=subprocess.DEVNULL, env=git_environment())
            except OSError as exc:
                raise GitUnavailable(f"cannot run git: {exc}") from exc
            out = proc.stdout
            if out is None:     # pragma: no cover - stdout=PIPE always gives a stream
                raise GitFailed("git gave no output stream")
            _widen_pipe(out)
            reader = _Reader(out)
            finished = False
            try:
                yield from reader.chunks()
                finished = True
            finally:
                if not finished and proc.poll() is None:
                    proc.kill()
                reader.stop()
                out.close()
                code = proc.wait()
            if code != 0:
                err.seek(0)
                raise GitFailed(_failure(args, code, err.read()))

    def batch(self, args: Sequence[str], lines: Iterable[str]) -> list[str]:
        """Feed ``lines`` to a ``--batch``/``--stdin`` git command; return its output lines."""
        data = "".join(line + "\n" for line in lines).encode("utf-8")
        out = self._run(args, input=data).stdout.decode("utf-8", "replace")
        return out.splitlines()

    # -- questions ----------------------------------------------------------------------
    def resolve_commit(self, ref: str) -> str:
        """Full hash of the commit ``ref`` names (:class:`UnknownRef` if none)."""
        proc = self._run(["rev-parse", "--verify", "--quiet", "--end-of-options",
                          f"{ref}^{{commit}}"], check=False)
        if proc.returncode == 0:
            return proc.stdout.decode("ascii").strip()
        if ref == "HEAD" and not self.has_commits():
            raise UnknownRef(f"{self.path}: the repository has no commits yet (empty repository)")
        raise UnknownRef(f"{self.path}: {ref!r} does not name a commit")

    def has_commits(self) -> bool:
        out = self._run(["rev-list", "--all", "--max-count=1"], check=False).stdout
        return bool(out.strip())

    def is_shallow(self) -> bool:
        return self.text("rev-parse", "--is-shallow-repository").strip() == "true"

    def is_ancestor(self, old: str, new: str) -> bool:
        """True when ``old`` is an ancestor of (or equal to) ``new``; False also when
        ``old`` no longer exists in the repository."""
        proc = self._run(["merge-base", "--is-ancestor", old, new], check=False)
        if proc.returncode in (0, 1):
            return proc.returncode == 0
        return False

    def is_partial_clone(self, tip: str) -> bool:
        """True for a partial clone whose file contents are absent: it has promisor packs
        or a promisor remote, and blobs of ``tip``'s tree are missing (listed without
        fetching by ``rev-list --missing=print``). A mirror kept in promisor packs with
        every blob present is a full clone."""
        promisor = any((self.git_dir / "objects" / "pack").glob("*.promisor"))
        if not promisor:
            proc = self._run(["config", "--get-regexp",
                              r"^(remote\..*\.(promisor|partialclonefilter)|"
                              r"extensions\.partialclone)$"], check=False)
            promisor = proc.returncode == 0 and any(
                ln.split(None, 1)[-1].strip().lower() not in ("false", "no", "off", "0")
                for ln in proc.stdout.decode("utf-8", "replace").splitlines() if " " in ln)
        if not promisor:
            return False
        proc = self._run(["rev-list", "--objects", "--missing=print", f"{tip}^{{tree}}", "--"],
                         check=False)
        return any(ln.startswith(b"?") for ln in proc.stdout.splitlines())

    def has_object(self, oid: str) -> bool:
        """True when ``oid`` is in the object store (never fetched: GIT_NO_LAZY_FETCH and
        no transport allowed)."""
        return self._run(["cat-file", "-e", oid], check=False).returncode == 0

    def config_value(self, key: str) -> str | None:
        proc = self._run(["config", "--get", key], check=False)
        return proc.stdout.decode("utf-8", "replace").strip() if proc.returncode == 0 else None

    def blob(self, oid: str) -> bytes | None:
        """The bytes of blob ``oid``, or None when the object store lacks it (nothing is
        fetched) or it is not a blob."""
        proc = self._run(["cat-file", "blob", oid], check=False)
        return proc.stdout if proc.returncode == 0 else None

    def blob_at(self, commit: str, path: str) -> tuple[str, bytes] | None:
        """``(blob hash, bytes)`` of ``path`` in ``commit``, or None when absent."""
        proc = self._run(["rev-parse", "--verify", "--quiet", f"{commit}:{path}"], check=False)
        if proc.returncode != 0:
            return None
        blob = proc.stdout.decode("ascii").strip()
        if not self.has_object(blob):
            raise ObjectAbsent(blob, f"{commit}:{path}")
        if self.text("cat-file", "-t", blob).strip() != "blob":
            return None
        return blob, self._run(["cat-file", "blob", blob]).stdout


class ObjectAbsent(GitFailed):
    """An object the tree names is not in the clone (partial or damaged clone)."""

    def __init__(self, oid: str, where: str) -> None:
        super().__init__(f"object {oid} ({where}) is not in the clone")
        self.oid, self.where = oid, where


def _widen_pipe(out) -> None:
    """Ask Linux for a larger pipe buffer (fewer, larger reads); harmless elsewhere."""
    setsize = getattr(fcntl, "F_SETPIPE_SZ", None) if fcntl is not None else None
    if setsize is None:
        return
    try:
        fcntl.fcntl(out.fileno(), setsize, PIPE_SIZE)
    except OSError:     # above /proc/sys/fs/pipe-max-size or the user's pipe quota
        pass


class _Reader:
    """Read a pipe on a thread into a bounded queue (chunks; b"" ends; an exception
    raised while reading is passed on to the consumer)."""

    def __init__(self, out) -> None:
        self._out = out
        self._queue: queue.Queue = queue.Queue(maxsize=READ_AHEAD)
        self._stopping = threading.Event()
        self._thread = threading.Thread(target=self._pump, name="git-reader", daemon=True)
        self._thread.start()

    def _pump(self) -> None:
        try:
            while not self._stopping.is_set():
                chunk = self._out.read1(CHUNK)
                self._queue.put(chunk)
                if not chunk:
                    return
        except BaseException as exc:  # noqa: BLE001 - handed to the consumer
            self._queue.put(exc)

    def chunks(self) -> Iterator[bytes]:
        while True:
            item = self._queue.get()
            if isinstance(item, BaseException):
                raise item
            if not item:
                return
            yield item

    def stop(self) -> None:
        """Let the thread end (the caller has killed git or read to the end)."""
        self._stopping.set()
        while self._thread.is_alive():
            try:        # make room for a put that is blocked on a full queue
                self._queue.get(timeout=0.05)
            except queue.Empty:
                pass
        self._thread.join()


def _failure(args: Sequence[str], code: int, stderr: bytes) -> str:
    msg = stderr.decode("utf-8", "replace").strip().splitlines()
    detail = msg[-1] if msg else "no message"
    if "promisor remote" in detail:
        detail += (" (a partial clone without these objects; procmetrics never fetches: "
                   "mine a full clone)")
    return f"git {args[0] if args else ''} failed (exit {code}): {detail}"


def _explain_refusal(given: Path, err: str) -> None:
    """Name what is wrong when git cannot open ``given``: a folder this user may not
    read, or git's refusal of a repository owned by someone else (with the remedy).
    Returns when neither applies (then the folder is simply not a repository)."""
    import shlex

    for folder in (given, given / ".git"):
        if folder.is_dir() and not os.access(folder, os.R_OK | os.X_OK):
            raise NotARepository(f"{folder}: permission denied: this user cannot read the "
                                 "folder (check its owner and mode, e.g. ls -ld)")
    first = err.splitlines()[0] if err else ""
    if "dubious ownership" in err:
        raise NotARepository(
            f"{given}: git refuses to read a repository owned by another user ({first}); "
            f"if you trust it: git config --global --add safe.directory {shlex.quote(str(given))}")
    if "permission denied" in err.lower():
        raise NotARepository(f"{given}: permission denied while git read it ({first})")


def patch_ids(repo: GitRepo, commits: Sequence[str]) -> list[tuple[str, str]]:
    """``(commit, patch id)`` of each non-merge ``commit`` with a non-empty diff.

    One ``git log -p --no-walk=unsorted --stdin`` process (the commits on its stdin)
    piped straight into one ``git patch-id --stable``; both run in the same
    controlled environment as every other call. Merges and empty commits get no
    patch id (git prints none for them).
    """
    if not commits:
        return []
    env = git_environment()
    log_argv = repo.argv(["log", "-p", "--no-walk=unsorted", "--stdin", "--no-merges",
                          "--no-color", "--no-ext-diff", "--no-textconv", "--no-renames",
                          "--format=commit %H", "--"])
    pid_argv = repo.argv(["patch-id", "--stable"])
    data = "".join(c + "\n" for c in commits).encode("ascii")
    with tempfile.TemporaryFile() as err1, tempfile.TemporaryFile() as err2:
        try:
            log = subprocess.Popen(log_argv, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                   stderr=err1, env=env)
            pid = subprocess.Popen(pid_argv, stdin=log.stdout, stdout=subprocess.PIPE,
                                   stderr=err2, env=env)
        except OSError as exc:
            raise GitUnavailable(f"cannot run git: {exc}") from exc
        if log.stdin is None or log.stdout is None:  # pragma: no cover - PIPE given
            raise GitFailed("git gave no pipe")
        log.stdout.close()          # patch-id owns the read end now
        writer = threading.Thread(target=_feed, args=(log.stdin, data), daemon=True)
        writer.start()
        out, _ = pid.communicate()
        writer.join()
        code_log, code_pid = log.wait(), pid.returncode
        for code, err, args in ((code_log, err1, ["log"]), (code_pid, err2, ["patch-id"])):
            if code != 0:
                err.seek(0)
                raise GitFailed(_failure(args, code, err.read()))
    return _patch_id_rows(out)


def _patch_id_rows(out: bytes) -> list[tuple[str, str]]:
    """``(commit, patch id)`` from ``git patch-id`` output (``<patch id> <commit>`` lines)."""
    rows = []
    for line in out.decode("ascii", "replace").splitlines():
        parts = line.split()
        if len(parts) == 2:
            rows.append((parts[1], parts[0]))
    return rows


def mapped_patch_ids(repo: GitRepo, commits: Sequence[str],
                     pairs: Sequence[tuple[str, str]]) -> list[tuple[str, str]]:
    """``(commit, patch id)`` of the part of each commit under the upstream prefixes of
    ``pairs``, with those prefixes renamed to the tree's (a mirrored subtree).

    One ``git log -p --relative=<upstream prefix>`` per pair, its paths written under the
    tree prefix (``--src-prefix``/``--dst-prefix``); the parts of one commit are joined
    and handed to one ``git patch-id --stable``, which sums per-file hashes, so the order
    of the parts does not matter. A commit that changes nothing under the prefixes gets
    no patch id.
    """
    if not commits:
        return []
    data = "".join(c + "\n" for c in commits).encode("ascii")
    parts: dict[bytes, list[bytes]] = {}
    for up, tree in pairs:
        args = ["log", "-p", "--no-walk=unsorted", "--stdin", "--no-merges", "--no-color",
                "--no-ext-diff", "--no-textconv", "--no-renames", "--format=commit %H",
                f"--src-prefix=a/{tree}", f"--dst-prefix=b/{tree}"]
        if up:
            args.append(f"--relative={up}")
        # the pathspec lets git skip the diffs of other folders (and commits without one)
        out = repo._run(args + ["--"] + ([up] if up else []), input=data).stdout
        for chunk in re.split(rb"(?m)^(?=commit [0-9a-f]{40,64}$)", out):
            head, _, body = chunk.partition(b"\n")
            if head.startswith(b"commit ") and body.strip():
                parts.setdefault(head[7:].strip(), []).append(body)
    if not parts:
        return []
    joined = b"".join(b"commit " + h + b"\n" + b"".join(bodies) for h, bodies in parts.items())
    out = repo._run(["patch-id", "--stable"], input=joined).stdout
    return _patch_id_rows(out)


def _feed(stream, data: bytes) -> None:
    try:
        stream.write(data)
    except BrokenPipeError:     # git stopped early; its exit code tells why
        pass
    finally:
        try:
            stream.close()
        except BrokenPipeError:
            pass
