"""Build a synthetic kernel-scale git history with ``git fast-import``.

The history is invented (invented people, directories and subsystems) but has
the shape that makes mining expensive: tens of thousands of files in a deep
tree of a few hundred directories, a large MAINTAINERS file (F:, X:, N:
entries), most commits signed off, many reviewed/acked, about 12% carrying
``Fixes:`` lines that cite earlier commits (by 8- to 40-digit hashes, some
unknowable), reverts, topic branches merged with merge commits, and release
tags. Trailer practice has eras: review trailers and ``Fixes:`` grow more common
as the history goes on.

The fast-import stream is produced by Python while fast-import runs, so a
million-commit history needs no temporary files. Commit hashes are learnt back
through ``get-mark`` on fast-import's output so later commits can cite them.

Refs written:

* ``main`` (HEAD): ``--commits`` non-merge commits plus merges;
* ``next``: ``main`` plus ``--extra`` further non-merge commits (incremental mining);
* ``prefix/<n>`` for every ``--prefix n``: the first commit on ``main`` at which
  ``n`` non-merge commits exist;
* tags ``v<major>.<minor>`` (annotated) and ``v<major>.<minor>-rc<k>`` (lightweight).

Usage::

    python bench/generate.py --commits 20000 --out bench/cache/kernel-20000
"""
from __future__ import annotations

import argparse
import bisect
import collections
import json
import os
import random
import subprocess
import sys
import threading
import time
from pathlib import Path

# 2: release tags at an even pace (one every max(50, commits / 3000) commits)
GENERATOR_VERSION = 2

FIRST = ["Alba", "Brin", "Cato", "Dara", "Elio", "Fenn", "Gala", "Hale", "Ines", "Joss",
         "Kira", "Lior", "Mira", "Nilo", "Orla", "Pere", "Quin", "Rhea", "Sami", "Tova",
         "Ulla", "Vero", "Wren", "Xeno", "Yara", "Zeno", "Aron", "Beda", "Cira", "Dov"]
SYL = ["ka", "lo", "mi", "ne", "ru", "ta", "vo", "shi", "ber", "dan", "gul", "hor", "ket",
       "mar", "nol", "pim", "quo", "ris", "sel", "tun", "vek", "wol", "yan", "zor"]
TOP = ["core", "drivers", "fs", "net", "arch", "lib", "sound", "tools", "security",
       "crypto", "block", "mm", "include", "scripts", "docs", "virt", "ipc", "init"]
VERBS = ["fix", "add", "remove", "rework", "convert", "simplify", "handle", "avoid",
         "use", "drop", "clean up", "refactor", "document", "support", "validate"]
NOUNS = ["null pointer dereference", "race in teardown", "leak on error path", "locking",
         "buffer size check", "timeout handling", "reset sequence", "probe error path",
         "statistics counters", "queue depth", "firmware loading", "register layout",
         "power state", "interrupt masking", "DMA mapping", "reference counting"]


def _word(rng: random.Random, n: int) -> str:
    return "".join(rng.choice(SYL) for _ in range(n))


def build_tree(rng: random.Random, n_dirs: int, n_files: int) -> tuple[list[str], list[list[str]]]:
    """Directories (a deep tree) and the initial files of each."""
    dirs: list[str] = list(TOP)
    seen = set(dirs)
    while len(dirs) < n_dirs:
        parent = rng.choice(dirs)
        if parent.count("/") >= 5:
            continue
        d = f"{parent}/{_word(rng, rng.randint(2, 3))}"
        if d not in seen:
            seen.add(d)
            dirs.append(d)
    weights = [rng.lognormvariate(0.0, 0.9) for _ in dirs]
    total = sum(weights)
    files: list[list[str]] = []
    for d, w in zip(dirs, weights):
        k = max(3, int(n_files * w / total))
        names = {f"{_word(rng, 2)}_{i}.{'c' if rng.random() < 0.7 else 'h'}" for i in range(k)}
        files.append(sorted(f"{d}/{n}" for n in names))
    return dirs, files


def maintainers(rng: random.Random, dirs: list[str], people: list[tuple[str, str]],
                n_entries: int) -> bytes:
    """A MAINTAINERS-style file: one entry per section, F:/X:/N: patterns."""
    out = ["List of maintainers (synthetic, invented)\n", "", ""]
    names = set()
    entries = []
    while len(entries) < n_entries:
        d = rng.choice(dirs)
        title = f"{d.split('/')[-1].upper()} {rng.choice(['DRIVER', 'SUBSYSTEM', 'SUPPORT', 'CORE'])} {_word(rng, 2).upper()}"
        if title in names:
            continue
        names.add(title)
        lines = [title]
        for _ in range(rng.randint(1, 3)):
            n, e = rng.choice(people)
            lines.append(f"M:\t{n} <{e}>")
        lines.append(f"L:\t{d.split('/')[0]}-devel@lists.example.org")
        lines.append(f"S:\t{rng.choice(['Maintained', 'Supported', 'Odd Fixes'])}")
        lines.append(f"F:\t{d}/")
        if rng.random() < 0.3:
            lines.append(f"F:\tinclude/{d.split('/')[-1]}*.h")
        if rng.random() < 0.15:
            lines.append(f"X:\t{d}/{_word(rng, 2)}/")
        if rng.random() < 0.1:
            lines.append(f"N:\t{d.split('/')[-1]}")
        entries.append((title, lines))
    entries.sort()
    for _, lines in entries:
        out.extend(lines)
        out.append("")
    return ("\n".join(out) + "\n").encode()


def initial_content(rng: random.Random, path: str) -> bytes:
    n = rng.randint(15, 70)
    ident = path.rsplit("/", 1)[-1].split(".")[0]
    lines = [f"/* {ident}: synthetic source */"]
    r = rng.random
    lines += [f"\tstate_{ident}[{i}] = step({i}, {int(r() * 10000)});" for i in range(n)]
    return ("\n".join(lines) + "\n").encode()


def mutate(rng: random.Random, content: bytes, serial: int) -> bytes:
    lines = content.split(b"\n")
    n = len(lines)
    at = rng.randrange(1, max(2, n - 1))
    k = min(rng.randint(1, 6), n - at)
    new = [b"\tupdate(%d, %d);" % (serial, j) for j in range(rng.randint(0, 8))]
    if n > 200:   # keep files bounded: shrink more than we grow
        k = min(k + 10, n - at)
    lines[at:at + k] = new
    return b"\n".join(lines)


class Generator:
    def __init__(self, args: argparse.Namespace) -> None:
        self.args = args
        self.rng = random.Random(args.seed)
        rng = self.rng
        self.people = [(f"{rng.choice(FIRST)} {_word(rng, 2).capitalize()}{_word(rng, 1)}",)
                       for _ in range(args.people)]
        self.people = [(n[0], n[0].lower().replace(" ", ".") + f"@{_word(rng, 2)}.example")
                       for n in self.people]
        self.dirs, files = build_tree(rng, args.dirs, args.files)
        self.dir_files = files
        self.content: dict[str, bytes] = {}
        self.dir_weight = [rng.lognormvariate(0.0, 1.3) for _ in self.dirs]
        self.mark = 0
        self.hashes: list[tuple[int, bytes, str]] = []   # (mark, hash, subject) known back
        self._last_dir = "core"
        self.n_nonmerge = 0
        self.t0 = 1_104_537_600      # 2005-01-01
        self.span = int(args.years * 365 * 86400)
        self.total = args.commits + args.extra

    # -- fast-import output -------------------------------------------------
    def _reader(self, stream) -> None:
        pending = self.pending
        for line in stream:
            mark, subj = pending.popleft()
            self.hashes.append((mark, line.strip(), subj))

    def run(self, out: Path) -> None:
        out.mkdir(parents=True, exist_ok=True)
        subprocess.run(["git", "init", "--quiet", "--initial-branch=main", str(out)], check=True)
        env = {**os.environ, "GIT_CONFIG_NOSYSTEM": "1", "GIT_CONFIG_GLOBAL": os.devnull}
        proc = subprocess.Popen(
            ["git", "-C", str(out), "fast-import", "--quiet", "--done",
             "--max-pack-size=4g", "--depth=50"],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, env=env, bufsize=1 << 20)
        self.pending: collections.deque[tuple[int, str]] = collections.deque()
        reader = threading.Thread(target=self._reader, args=(proc.stdout,), daemon=True)
        reader.start()
        self.w = proc.stdin
        start = time.perf_counter()
        try:
            self.write_history()
            self.w.write(b"done\n")
            self.w.close()
        except BrokenPipeError:
            pass
        rc = proc.wait()
        reader.join()
        if rc != 0:
            raise SystemExit(f"git fast-import failed with exit code {rc}")
        subprocess.run(["git", "-C", str(out), "symbolic-ref", "HEAD", "refs/heads/main"], check=True)
        subprocess.run(["git", "-C", str(out), "update-ref", "-d", "refs/heads/topic"], check=False)
        subprocess.run(["git", "-C", str(out), "commit-graph", "write", "--reachable"],
                       check=True, env=env)
        marker = {k: (str(v) if isinstance(v, Path) else v) for k, v in vars(self.args).items()}
        marker["generator_version"] = GENERATOR_VERSION
        (out / ".git" / "bench-complete.json").write_text(json.dumps(marker, sort_keys=True))
        print(f"generated {self.total} non-merge commits in {time.perf_counter() - start:.0f} s "
              f"-> {out}", file=sys.stderr)

    def _data(self, payload: bytes) -> None:
        self.w.write(b"data %d\n" % len(payload))
        self.w.write(payload)
        self.w.write(b"\n")

    # -- history ----------------------------------------------------------
    def when(self, serial: int) -> int:
        # rate grows with time: serial ~ t^2
        return self.t0 + int(self.span * (serial / max(1, self.total)) ** 0.5)

    def person(self) -> tuple[str, str]:
        # a few prolific people, a long tail
        i = min(int(self.rng.paretovariate(0.9)) - 1, len(self.people) - 1)
        return self.people[(i * 7919) % len(self.people)]

    def subject(self) -> str:
        rng = self.rng
        return f"{self._last_dir.rsplit('/', 1)[-1]}: {rng.choice(VERBS)} {rng.choice(NOUNS)}"

    def message(self, serial: int, subj: str, author: tuple[str, str],
                committer: tuple[str, str]) -> bytes:
        rng = self.rng
        frac = serial / max(1, self.total)
        body = [subj, "", f"The {rng.choice(NOUNS)} path did not account for case {serial % 97}.",
                "Handle it explicitly and keep the old behaviour otherwise.", ""]
        fixes: list[str] = []
        if frac > 0.25 and rng.random() < 0.15 and len(self.hashes) > 10:
            for _ in range(1 if rng.random() < 0.93 else rng.randint(2, 4)):
                back = min(len(self.hashes) - 1,
                           int(rng.expovariate(1 / self.args.fix_distance)))
                _m, h, cited = self.hashes[len(self.hashes) - 1 - back]
                r = rng.random()
                if r < 0.04:
                    fixes.append(f"Fixes: {'%012x' % rng.getrandbits(48)} (\"{rng.choice(NOUNS)}\")")
                elif r < 0.10:
                    fixes.append(f"Fixes: {h[:rng.randint(8, 11)].decode()}")
                elif r < 0.13:
                    fixes.append(f"Fixes: commit {h.decode()}")
                else:
                    fixes.append(f"Fixes: {h[:12].decode()} (\"{cited}\")")
            if rng.random() < 0.06:     # some sit in the body, outside the trailer block
                body[3:3] = [fixes.pop(0), ""]
        trailers = list(fixes)
        if rng.random() < 0.08:
            n, e = self.person()
            trailers.append(f"Reported-by: {n} <{e}>")
        if fixes and rng.random() < 0.3:
            trailers.append("Cc: stable@lists.example.org")
        trailers.append(f"Signed-off-by: {author[0]} <{author[1]}>")
        p_review = 0.05 + 0.5 * frac
        for key, p in (("Reviewed-by", p_review), ("Acked-by", 0.1 + 0.2 * frac),
                       ("Tested-by", 0.03 + 0.1 * frac)):
            while rng.random() < p:
                n, e = self.person()
                trailers.append(f"{key if rng.random() > 0.01 else key.upper()}: {n} <{e}>")
                p *= 0.4
        if committer != author and rng.random() < 0.97:
            trailers.append(f"Signed-off-by: {committer[0]} <{committer[1]}>")
        if rng.random() < 0.02:   # no sign-off at all
            trailers = [t for t in trailers if not t.startswith("Signed-off-by")]
        return ("\n".join(body + trailers) + "\n").encode()

    def pick_files(self) -> list[str]:
        rng = self.rng
        d = rng.choices(range(len(self.dirs)), weights=self.dir_weight)[0] \
            if rng.random() < 0.02 else self._hot_dir()
        files = self.dir_files[d]
        k = min(len(files), 1 + int(rng.expovariate(0.6)))
        chosen = rng.sample(files, k)
        if rng.random() < 0.1:
            other = self.dir_files[self._hot_dir()]
            chosen.append(rng.choice(other))
        return list(dict.fromkeys(chosen))

    def _hot_dir(self) -> int:
        # cheap weighted choice via cumulative table
        if not hasattr(self, "_cum"):
            acc, self._cum = 0.0, []
            for w in self.dir_weight:
                acc += w
                self._cum.append(acc)
        return min(bisect.bisect(self._cum, self.rng.random() * self._cum[-1]), len(self._cum) - 1)

    def commit(self, ref: bytes, serial: int, parent: int | None, merge: int | None = None,
               changes: list[bytes] | None = None, message: bytes | None = None) -> int:
        rng = self.rng
        self.mark += 1
        mark = self.mark
        ct = self.when(serial)
        at = ct - (int(rng.expovariate(1 / 86400 / 4)) if rng.random() < 0.9
                   else int(rng.expovariate(1 / 86400 / 60)))
        author = self.person()
        committer = author if rng.random() < 0.3 else self.person()
        tz_a = rng.choice([b"+0000", b"+0100", b"+0200", b"-0700", b"-0400", b"+0530", b"+0900", b"-0800"])
        tz_c = rng.choice([b"+0000", b"+0100", b"+0200", b"-0700"])
        if changes is None:
            changes = self.changes(serial)
        subj = self.subject()
        if message is None:
            message = self.message(serial, subj, author, committer)
        w = self.w
        w.write(b"commit " + ref + b"\nmark :%d\n" % mark)
        w.write(b"author %s <%s> %d %s\n" % (author[0].encode(), author[1].encode(), at, tz_a))
        w.write(b"committer %s <%s> %d %s\n" % (committer[0].encode(), committer[1].encode(), ct, tz_c))
        self._data(message)
        if parent is not None:
            w.write(b"from :%d\n" % parent)
        if merge is not None:
            w.write(b"merge :%d\n" % merge)
        for c in changes:
            w.write(c)
        w.write(b"\n")
        if merge is None:
            self.pending.append((mark, subj))
            w.write(b"get-mark :%d\n" % mark)
        return mark

    def changes(self, serial: int) -> list[bytes]:
        rng = self.rng
        out = []
        r = rng.random()
        if r < 0.015:          # new file
            d = self._hot_dir()
            path = f"{self.dirs[d]}/{_word(rng, 2)}_n{serial}.c"
            self.dir_files[d].append(path)
            self.content[path] = initial_content(rng, path)
            out.append(self._modify(path))
            return out
        if r < 0.02:           # delete
            d = self._hot_dir()
            if len(self.dir_files[d]) > 5:
                path = self.dir_files[d].pop(rng.randrange(len(self.dir_files[d])))
                self.content.pop(path, None)
                self._last_dir = self.dirs[d]
                return [b"D " + path.encode() + b"\n"]
        if r < 0.025:          # rename
            d = self._hot_dir()
            if len(self.dir_files[d]) > 5:
                i = rng.randrange(len(self.dir_files[d]))
                old = self.dir_files[d][i]
                new = old.rsplit("/", 1)[0] + f"/{_word(rng, 2)}_r{serial}.c"
                self.dir_files[d][i] = new
                self.content[new] = self.content.pop(old, None) or initial_content(rng, old)
                self._last_dir = self.dirs[d]
                return [b'R "' + old.encode() + b'" "' + new.encode() + b'"\n']
        if r < 0.027:
            self.content["MAINTAINERS"] = mutate(rng, self.content["MAINTAINERS"], serial)
            out.append(self._modify("MAINTAINERS"))
        for path in self.pick_files():
            old = self.content.get(path)
            if old is None:
                old = initial_content(rng, path)
            self.content[path] = mutate(rng, old, serial)
            out.append(self._modify(path))
        return out

    def _modify(self, path: str) -> bytes:
        if path != "MAINTAINERS":
            self._last_dir = path.rsplit("/", 1)[0]
        data = self.content[path]
        return b"M 100644 inline " + path.encode() + b"\ndata %d\n" % len(data) + data + b"\n"

    def write_history(self) -> None:
        args, rng = self.args, self.rng
        # initial import: the whole tree and MAINTAINERS
        self.content["MAINTAINERS"] = maintainers(rng, self.dirs, self.people, args.maintainers)
        init = [self._modify("MAINTAINERS")]
        for files in self.dir_files:
            for path in files:
                self.content[path] = initial_content(rng, path)
                init.append(self._modify(path))
        msg = b"Initial import\n\nSigned-off-by: Alba Kalo <alba.kalo@kalo.example>\n"
        main = self.commit(b"refs/heads/main", 0, None, changes=init, message=msg)
        self.n_nonmerge = 1
        prefixes = sorted(set(args.prefix))
        release, rc = 1, 0
        tag_every = max(50, args.commits // 3000)
        next_tag = tag_every
        ref = b"refs/heads/main"
        serial = 1
        while self.n_nonmerge < self.total:
            if self.n_nonmerge == args.commits:
                ref = b"refs/heads/next"
                self.w.write(b"reset refs/heads/next\nfrom :%d\n\n" % main)
            if ref == b"refs/heads/main" and rng.random() < 0.1:
                # a topic branch of several commits, merged with a merge commit
                k = min(1 + int(rng.expovariate(1 / 8)), args.commits - self.n_nonmerge)
                tip = main
                topic = b"refs/heads/topic"
                self.w.write(b"reset refs/heads/topic\nfrom :%d\n\n" % main)
                replay: list[bytes] = []
                for _ in range(k):
                    ch = self.changes(serial)
                    replay.extend(ch)
                    tip = self.commit(topic, serial, tip, changes=ch)
                    serial += 1
                    self.n_nonmerge += 1
                    self._after_commit(prefixes, tip)
                # main has not moved meanwhile: replaying the topic's changes on
                # main gives the merge the topic's tree, with main as first parent
                subj = f"Merge branch '{_word(rng, 2)}-next' of {_word(rng, 3)}"
                main = self._merge(main, tip, serial, subj.encode(), replay)
            else:
                main = self.commit(ref, serial, main)
                serial += 1
                self.n_nonmerge += 1
                self._after_commit(prefixes, main)
            if ref == b"refs/heads/main" and serial >= next_tag:
                next_tag += tag_every
                self._tag(release, rc, main, serial)
                rc += 1
                if rc == 8:
                    rc, release = 0, release + 1

    def _after_commit(self, prefixes: list[int], mark: int) -> None:
        if prefixes and self.n_nonmerge == prefixes[0]:
            self.w.write(b"reset refs/heads/prefix/%d\nfrom :%d\n\n" % (prefixes[0], mark))
            prefixes.pop(0)

    def _merge(self, main: int, tip: int, serial: int, subj: bytes,
               replay: list[bytes]) -> int:
        self.mark += 1
        mark = self.mark
        n, e = self.person()
        w = self.w
        w.write(b"commit refs/heads/main\nmark :%d\n" % mark)
        w.write(b"committer %s <%s> %d +0000\n" % (n.encode(), e.encode(), self.when(serial)))
        self._data(subj + b"\n")
        w.write(b"from :%d\nmerge :%d\n" % (main, tip))
        for c in replay:
            w.write(c)
        w.write(b"\n")
        return mark

    def _tag(self, release: int, rc: int, mark: int, serial: int) -> None:
        ct = self.when(serial)
        if rc == 7:
            name = b"v%d.%d" % (release // 20 + 1, release % 20)
            self.w.write(b"tag " + name + b"\nfrom :%d\n" % mark)
            self.w.write(b"tagger Release Bot <release@bot.example> %d +0000\n" % ct)
            self._data(b"Release " + name + b"\n")
        else:
            name = b"v%d.%d-rc%d" % (release // 20 + 1, release % 20, rc + 1)
            self.w.write(b"reset refs/tags/" + name + b"\nfrom :%d\n\n" % mark)


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--out", type=Path, required=True, help="new repository folder")
    p.add_argument("--commits", type=int, default=1_000_000, help="non-merge commits on main")
    p.add_argument("--extra", type=int, default=1000, help="further non-merge commits on 'next'")
    p.add_argument("--prefix", type=int, action="append", default=[],
                   help="make ref prefix/N at N non-merge commits (repeatable)")
    p.add_argument("--files", type=int, default=58_000, help="files in the initial tree")
    p.add_argument("--dirs", type=int, default=600, help="directories")
    p.add_argument("--maintainers", type=int, default=3000, help="MAINTAINERS entries")
    p.add_argument("--people", type=int, default=4000)
    p.add_argument("--seed", type=int, default=20261201)
    p.add_argument("--years", type=float, default=20.0, help="span of the history from 2005")
    p.add_argument("--fix-distance", type=float, default=3000.0,
                   help="mean distance (commits) from a fix back to the commit it cites")
    args = p.parse_args(argv)
    if args.out.exists() and any(args.out.iterdir()):
        p.error(f"{args.out} exists and is not empty")
    Generator(args).run(args.out)
    return 0


if __name__ == "__main__":
    sys.exit(main())
