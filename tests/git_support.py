"""Helpers for tests: tiny, fully deterministic git histories built in ``tmp_path``.

:class:`GitHistory` drives the real ``git`` with an isolated configuration
(no system or user config, fixed default branch ``main``) and sets author and
committer identities and dates per commit through ``GIT_AUTHOR_*`` /
``GIT_COMMITTER_*``, so the same calls always give the same hashes.

    def test_x(git_history):
        h = git_history()                       # new empty repository in tmp_path
        a = h.commit("first", files={"a.txt": "1\\n"}, author=ALICE, date=when(0, "+0200"))
        h.branch("topic"); h.checkout("topic")
        b = h.commit("side", files={"b.bin": b"\\0\\1"}, author=BOB, date=when(1, "-0500"))
        h.checkout("main")
        m = h.merge("topic", date=when(2))
        h.tag("v1.0", message="release", date=when(3))

``sample_history`` (session-scoped, read-only) is a ready-made history with
merges (one octopus), two root commits, a rename, a binary file, non-UTF-8
messages and names, an empty message, trailers, fix and revert references,
tags and a ``.mailmap``; its interesting hashes are in ``sample_history.ids``.
"""
from __future__ import annotations

import os
import shutil
import subprocess
from dataclasses import dataclass, field
from pathlib import Path
from typing import Mapping

ALICE = ("Alice Example", "alice@example.org")
BOB = ("Bob Sample", "bob@example.net")
CAROL = ("Carol Test", "carol@example.com")
DAVE = ("Dave Demo", "dave@example.com")
EPOCH0 = 1_600_000_000          # 2020-09-13T12:26:40Z


def when(day: float, tz: str = "+0000") -> str:
    """A git raw date ``"<epoch> <tz>"``: ``day`` days after 2020-09-13T12:26:40Z."""
    return f"{EPOCH0 + int(day * 86400)} {tz}"


def isolated_env(home: Path) -> dict[str, str]:
    """Environment for test-side git: no system/user config, no pager, fixed locale."""
    env = {k: v for k, v in os.environ.items() if not k.startswith("GIT_")}
    env.update({"GIT_CONFIG_NOSYSTEM": "1", "GIT_CONFIG_GLOBAL": "/dev/null", "HOME": str(home),
                "GIT_TERMINAL_PROMPT": "0", "GIT_PAGER": "cat", "LC_ALL": "C"})
    return env


@dataclass
class GitHistory:
    """A git repository under construction (see module docstring)."""

    path: Path
    env: dict[str, str]
    ids: dict[str, str] = field(default_factory=dict)

    @classmethod
    def create(cls, path: Path, *, bare: bool = False) -> "GitHistory":
        path.mkdir(parents=True, exist_ok=True)
        h = cls(path, isolated_env(path.parent))
        h.git("init", "-q", "-b", "main", *(["--bare"] if bare else []), ".")
        return h

    # -- raw access ---------------------------------------------------------------------
    def git_bytes(self, *args: str, input: bytes | None = None,
                  env: Mapping[str, str | bytes] | None = None) -> bytes:
        """Run git in the repository; return stdout (raises on failure)."""
        full = dict(self.env)
        if env:
            full.update(env)
        proc = subprocess.run(["git", "-C", str(self.path), *args], input=input,
                              capture_output=True, env=full)
        if proc.returncode != 0:
            raise RuntimeError(f"git {' '.join(args)} failed: {proc.stderr.decode(errors='replace')}")
        return proc.stdout

    def git(self, *args: str, input: bytes | None = None,
            env: Mapping[str, str | bytes] | None = None) -> str:
        return self.git_bytes(*args, input=input, env=env).decode("utf-8", "replace").strip()

    def rev(self, rev: str = "HEAD") -> str:
        return self.git("rev-parse", "--verify", f"{rev}^{{commit}}")

    # -- building -----------------------------------------------------------------------
    def write(self, files: Mapping[str, str | bytes | None]) -> None:
        """Write (str/bytes) or delete (None) files in the work tree and stage them."""
        for rel, content in files.items():
            p = self.path / rel
            if content is None:
                self.git("rm", "-q", "--", rel)
                continue
            p.parent.mkdir(parents=True, exist_ok=True)
            p.write_bytes(content.encode("utf-8") if isinstance(content, str) else content)
            self.git("add", "--", rel)

    def _ident_env(self, author, committer, date, committer_date) -> dict[str, str | bytes]:
        committer = committer or author
        return {"GIT_AUTHOR_NAME": author[0], "GIT_AUTHOR_EMAIL": author[1],
                "GIT_AUTHOR_DATE": date, "GIT_COMMITTER_NAME": committer[0],
                "GIT_COMMITTER_EMAIL": committer[1],
                "GIT_COMMITTER_DATE": committer_date or date}

    def commit(self, message: str | bytes = "change", *,
               files: Mapping[str, str | bytes | None] | None = None,
               author: tuple[str | bytes, str] = ALICE,
               committer: tuple[str | bytes, str] | None = None, date: str = when(0),
               committer_date: str | None = None, encoding: str | None = None,
               name: str | None = None) -> str:
        """Commit staged ``files`` with ``message`` kept verbatim; returns the hash.

        ``encoding`` (e.g. ``"ISO-8859-1"``) records ``i18n.commitEncoding`` in the
        commit; bytes messages/names are stored as given. ``name`` keeps the hash
        in ``self.ids[name]``.
        """
        if files:
            self.write(files)
        msg = message.encode("utf-8") if isinstance(message, str) else message
        cfg = ["-c", f"i18n.commitEncoding={encoding}"] if encoding else []
        self.git(*cfg, "commit", "-q", "--allow-empty", "--allow-empty-message",
                 "--cleanup=verbatim", "--no-verify", "-F", "-", input=msg,
                 env=self._ident_env(author, committer, date, committer_date))
        h = self.rev()
        if name:
            self.ids[name] = h
        return h

    def raw_commit(self, message: bytes, *, author: tuple[bytes, bytes] = (b"Raw Bytes",
                   b"raw@example.org"), date: str = when(0), name: str | None = None) -> str:
        """A commit object written byte for byte (``git hash-object --literally``):
        unlike ``git commit``, nothing re-encodes a non-UTF-8 message or name. Same tree
        as HEAD; HEAD's branch moves to it."""
        ident = author[0] + b" <" + author[1] + b"> " + date.encode()
        obj = (b"tree " + self.git("rev-parse", "HEAD^{tree}").encode() + b"\nparent "
               + self.rev().encode() + b"\nauthor " + ident + b"\ncommitter " + ident
               + b"\n\n" + message)
        h = self.git("hash-object", "-t", "commit", "-w", "--literally", "--stdin", input=obj)
        self.git("update-ref", "HEAD", h)
        if name:
            self.ids[name] = h
        return h

    def branch(self, name: str, start: str = "HEAD") -> None:
        self.git("branch", name, start)

    def checkout(self, name: str, *, orphan: bool = False) -> None:
        if orphan:
            self.git("checkout", "-q", "--orphan", name)
            self.git("rm", "-rq", "--cached", "--ignore-unmatch", ".")
            for p in self.path.iterdir():
                if p.name != ".git":
                    if p.is_dir():
                        shutil.rmtree(p)
                    else:
                        p.unlink()
        else:
            self.git("checkout", "-q", name)

    def merge(self, *branches: str, message: str | None = None, author=ALICE, committer=None,
              date: str = when(0), committer_date: str | None = None,
              unrelated: bool = False, name: str | None = None) -> str:
        """Merge ``branches`` (two or more make an octopus) with a merge commit."""
        msg = message or f"Merge {', '.join(branches)}"
        self.git("merge", "-q", "--no-ff", "--no-edit", "-m", msg,
                 *(["--allow-unrelated-histories"] if unrelated else []), *branches,
                 env=self._ident_env(author, committer, date, committer_date))
        h = self.rev()
        if name:
            self.ids[name] = h
        return h

    def tag(self, name: str, target: str = "HEAD", *, message: str | None = None,
            tagger=ALICE, date: str = when(0)) -> None:
        """Lightweight tag, or annotated with ``message`` (tagger date ``date``)."""
        if message is None:
            self.git("tag", name, target)
        else:
            self.git("tag", "-a", name, "-m", message, target,
                     env={"GIT_COMMITTER_NAME": tagger[0], "GIT_COMMITTER_EMAIL": tagger[1],
                          "GIT_COMMITTER_DATE": date})


def build_sample_history(path: Path) -> GitHistory:
    """The standard small history (see module docstring); deterministic hashes."""
    h = GitHistory.create(path)
    h.commit("init: start the project\n\nFirst commit.\n\nSigned-off-by: Alice Example "
             "<alice@example.org>\n",
             files={"README": "hello\n", "src/parse.c": "int a;\nint b;\n",
                    "net/link.c": "l1\nl2\nl3\nl4\nl5\nl6\n", "logo.png": b"\x89PNG\0\1\2\3"},
             author=("Alice Old", "alice@old.example"), date=when(0, "+0200"), name="root")
    h.tag("v0.1")
    h.commit("src: add the parser\n\nThe parser reads input.\n\n"
             "Signed-off-by: Bob Sample <bob@example.net>\n"
             "Reviewed-by: Carol Test <carol@example.com>\n"
             "Acked-by: Dave Demo <dave@example.com>\n",
             files={"src/parse.c": "int a;\nint b;\nint parse(void);\n"},
             author=BOB, date=when(1, "-0500"), committer=ALICE,
             committer_date=when(40, "+0100"), name="bug")
    h.commit("net: rename link.c\n\nreviewed-BY:   Carol Test <carol@example.com>\n"
             "Tested-by: Dave Demo <dave@example.com>\n",
             files={"net/link.c": None, "net/core.c": "l1\nl2\nl3\nl4\nl5\nl6\nl7\n"},
             author=CAROL, date=when(2, "+0530"), name="rename")
    h.branch("topic")
    h.branch("b1")
    h.branch("b2")
    h.checkout("topic")
    h.commit("topic: docs\n", files={"docs/guide.txt": "guide\n"}, author=DAVE,
             date=when(3, "+0545"), name="topic1")
    h.checkout("main")
    bug12 = h.ids["bug"][:12]
    h.commit(f"src: fix the parser\n\nIt crashed.\n\nFixes: {bug12} (\"src: add the parser\")\n"
             "Cc: stable@vger.example.org # 5.4+\nSigned-off-by: Alice Example "
             "<alice@example.org>\n",
             files={"src/parse.c": "int a;\nint b;\nint parse(void) ;\n"},
             author=ALICE, date=when(4, "-0700"), name="fix")
    h.merge("topic", date=when(5, "+0100"), name="merge")
    h.checkout("b1")
    h.commit("b1: add one\n", files={"b1.txt": "1\n"}, author=BOB, date=when(6), name="b1")
    h.checkout("b2")
    h.commit("b2: add two\n", files={"b2.txt": "2\n"}, author=CAROL, date=when(6.5), name="b2")
    h.checkout("main")
    h.merge("b1", "b2", message="Merge b1 and b2 (octopus)", date=when(7), name="octopus")
    h.checkout("extra", orphan=True)
    h.commit("extra: a second root\n", files={"extra/x.txt": "x\n"}, author=DAVE,
             date=when(8), name="root2")
    h.checkout("main")
    h.merge("extra", unrelated=True, date=when(9), name="merge_root2")
    rename, bug = h.ids["rename"], h.ids["bug"]
    h.commit(f"misc: several references\n\nThis papers over an old bug.\nFixes: {bug[:8]}\n"
             f"and more text in the body.\n\nFixes: commit {rename} (\"net: rename link.c\")\n"
             f"Fixes: {bug[:7]}, {rename[:12]}\nFixes: deadbeefdeadbeef (\"gone\")\n"
             "Fixes: #123\nLink: https://lists.example.org/msg/1\n",
             files={"src/misc.c": "m\n"}, author=BOB, date=when(10, "+0900"), name="multi")
    h.commit(b"latin: caf\xe9 cr\xe8me\n\nd\xe9j\xe0 vu\n", files={"latin.txt": "l\n"},
             author=(b"Ren\xe9 Latin", "rene@example.org"), date=when(11), encoding="ISO-8859-1",
             name="latin1")
    h.raw_commit(b"raw: na\xefve bytes\n\nno encoding header\n", author=(b"Ra\xefl Raw",
                 b"rail@example.org"), date=when(12), name="rawbytes")
    h.commit("", files={"empty.txt": "e\n"}, author=CAROL, date=when(13), name="empty")
    h.commit(f"Revert \"b1: add one\"\n\nThis reverts commit {h.ids['b1']}.\n",
             files={"b1.txt": None}, author=ALICE, date=when(14), name="revert")
    h.write({".mailmap": "Alice Example <alice@example.org> Alice Old <alice@old.example>\n"})
    h.commit("add mailmap\n", author=ALICE, date=when(15), name="mailmap")
    h.tag("v1.0", message="release 1.0", date=when(16, "+0300"))
    return h


def fast_import_commits(h: GitHistory, n: int, *, branch: str = "refs/heads/main",
                        start_day: float = 0.0, message: str = "change {i}") -> list[str]:
    """Append ``n`` commits (one small file each) to ``branch`` in ONE ``git fast-import``
    run (much faster than ``git commit``); returns their hashes, oldest first."""
    parent = h.git_bytes("rev-parse", "--verify", "-q", branch).decode().strip() \
        if h.git("for-each-ref", branch) else ""
    out = []
    for i in range(n):
        msg = message.format(i=i).encode()
        data = f"line {i}\n".encode()
        stamp = when(start_day + i / 1440).split()[0]
        out.append(b"commit %s\nmark :%d\ncommitter Fast Importer <fi@example.org> %s +0000\n"
                   b"data %d\n%s\n" % (branch.encode(), i + 1, stamp.encode(), len(msg), msg))
        if i == 0 and parent:
            out.append(b"from %s\n" % parent.encode())
        out.append(b"M 100644 inline f%d.txt\ndata %d\n%s\n" % (i % 50, len(data), data))
    h.git_bytes("fast-import", "--quiet", "--done", input=b"".join(out) + b"done\n")
    revs = h.git("rev-list", "--reverse", f"-{n}", branch).split()
    return revs
