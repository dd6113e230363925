"""Turn the planned aurora-fw history into a ``git fast-import`` stream (file contents too)."""
from __future__ import annotations

import posixpath
from typing import BinaryIO

from _aurora_data import (BODY_FEATURE, COMMENTS, IDENT, PERSON, RELEASE_MANAGER, SUB,
                          SUBSYSTEMS, mailmap_text, maintainers_text)
from _aurora_model import History, day_of
from _aurora_text import compose, ident, merge_message, tag_message

BINARY_SUFFIXES = (".png", ".der", ".bin")
BINARY_HEADERS = {".png": b"\x89PNG\r\n\x1a\n", ".der": b"\x30\x82\x01\x22", ".bin": b"AGT\x00"}
TOPIC_REF = "refs/scratch/topic"
PROTECTED_PREFIXES = ("include/", "MAINTAINERS", ".mailmap", "README.md", ".gitignore",
                      "Makefile", "docs/process/")


def is_binary(path: str) -> bool:
    return path.endswith(BINARY_SUFFIXES)


class Content:
    """Synthetic file contents: text is a tuple of lines, binary is bytes."""

    def __init__(self, rnd) -> None:
        self.rnd = rnd
        self.counter = 0

    def line(self, path: str, sub: str) -> str:
        r = self.rnd
        nouns = SUB[sub].nouns if sub in SUB else ("build",)
        noun = r.pick(nouns)
        word = noun.lower().replace(" ", "_").replace("-", "_")
        n = r.below(4096)
        ext = posixpath.splitext(path)[1]
        if ext in (".c", ".h", ".s"):
            return r.pick((f"\t{r.pick(IDENT)}->{word} = {n}U;",
                           f"\tif ({r.pick(IDENT)}->{word} > {n}U)",
                           "\t\treturn -EINVAL;",
                           f"\t/* {noun}: {r.pick(COMMENTS)} */",
                           f"static int {word}_step_{n}(struct aurora_ctx *ctx);",
                           f"#define AURORA_{word.upper()}_{r.pick(IDENT).upper()} 0x{n:04x}U"))
        if ext == ".py":
            return r.pick((f"    {word}_{r.pick(IDENT)} = read_register(port, 0x{n:04x})",
                           f"    # {noun}: {r.pick(COMMENTS)}",
                           f"def {word}_{n}(port):"))
        if ext == ".ld":
            return f"  .{word}_{n} : {{ *(.{word}*) }} > FLASH"
        if ext == ".cmake" or path.endswith("Makefile"):
            return f"set(AURORA_{word.upper()}_{n} ON)" if ext == ".cmake" \
                else f"CFLAGS += -DAURORA_{word.upper()}={n}"
        return r.pick(BODY_FEATURE).format(n=noun)

    def new_text(self, path: str, sub: str) -> tuple[str, ...]:
        head = f"aurora-fw: {path}"
        ext = posixpath.splitext(path)[1]
        first = {".md": f"# {head}", ".py": f"# {head}"}.get(ext, f"/* {head} */")
        return (first, *(self.line(path, sub) for _ in range(12 + self.rnd.below(40))))

    def new_binary(self, path: str) -> bytes:
        body = bytes(self.rnd.below(256) for _ in range(160 + self.rnd.below(400)))
        return BINARY_HEADERS[posixpath.splitext(path)[1]] + body

    def new(self, path: str, sub: str):
        return self.new_binary(path) if is_binary(path) else self.new_text(path, sub)

    def modify(self, old, path: str, sub: str):
        if isinstance(old, bytes):
            return self.new_binary(path)
        lines = list(old)
        for _ in range(1 + self.rnd.below(2)):
            at = 1 + self.rnd.below(max(1, len(lines) - 1))
            del lines[at:at + self.rnd.below(4)]
            lines[at:at] = [self.line(path, sub) for _ in range(1 + self.rnd.below(5))]
        if len(lines) > 160:
            cut = 1 + self.rnd.below(len(lines) - 60)
            del lines[cut:cut + 40]
        if tuple(lines) == tuple(old):     # never write an unchanged file (empty commit)
            self.counter += 1
            lines.append(self.line(path, sub) + f"  /* rev {self.counter} */"
                         if not path.endswith((".md", ".py", "Makefile", ".cmake"))
                         else f"# rev {self.counter}")
        return tuple(lines)

    def fresh_name(self, sub: str, like: str | None = None) -> str:
        """A new file name in the subsystem's home, or beside ``like`` with its suffix."""
        s = SUB[sub]
        self.counter += 1
        stem = self.rnd.pick(s.nouns).lower().replace(" ", "_").replace("-", "_")
        if like is not None:
            directory, ext = posixpath.dirname(like), posixpath.splitext(like)[1][1:]
            return f"{directory}/{stem}_{self.counter}.{ext or 'txt'}"
        ext = {"docs": "md", "tools": "py", "vendor": "h", "calib": "py"}.get(sub) or \
            ("h" if self.rnd.chance(0.2) else "c")
        return f"{s.home}/{stem}_{self.counter}.{ext}"


def encode(content) -> bytes:
    if isinstance(content, bytes):
        return content
    if isinstance(content, str):
        return content.encode("utf-8")
    return ("\n".join(content) + "\n").encode("utf-8")


class Stream:
    def __init__(self, history: History, fin: BinaryIO, fout: BinaryIO) -> None:
        self.h, self.fin, self.fout = history, fin, fout
        self.rnd = history.rand
        self.content = Content(self.rnd)
        self.buf = bytearray()
        self.next_mark = 1
        self.shas: dict[int, str] = {}
        self.owner: dict[str, str] = {}
        self.snapshots: dict[int, dict[str, tuple]] = {}
        self.revert_targets = {id(e.target) for e in history.events if e.target is not None}

    # -- low level --------------------------------------------------------------------------
    def w(self, data: bytes | str) -> None:
        self.buf += data.encode("utf-8") if isinstance(data, str) else data
        if len(self.buf) > 1 << 20:
            self.flush()

    def flush(self) -> None:
        self.fin.write(bytes(self.buf))
        self.fin.flush()
        self.buf.clear()

    def data(self, payload: bytes) -> None:
        self.w(f"data {len(payload)}\n")
        self.w(payload)
        self.w("\n")

    def sha(self, event) -> str:
        if event.mark not in self.shas:
            self.w(f"get-mark :{event.mark}\n")
            self.flush()
            answer = self.fout.readline().decode("ascii").strip()
            if len(answer) != 40:
                raise RuntimeError(f"git fast-import gave no hash for mark {event.mark}")
            self.shas[event.mark] = answer
        return self.shas[event.mark]

    def commit(self, ref: str, author: str, committer: str, message: str, parents: list[int],
               ops: list[tuple]) -> int:
        mark = self.next_mark
        self.next_mark += 1
        self.w(f"commit {ref}\nmark :{mark}\nauthor {author}\ncommitter {committer}\n")
        self.data(message.encode("utf-8"))
        if parents:
            self.w(f"from :{parents[0]}\n")
            for p in parents[1:]:
                self.w(f"merge :{p}\n")
        for op in ops:
            if op[0] == "M":
                self.w(f"M 100644 inline {op[1]}\n")
                self.data(encode(op[2]))
            elif op[0] == "D":
                self.w(f"D {op[1]}\n")
            else:
                self.w(f"R {op[1]} {op[2]}\n")
        return mark

    # -- file operations --------------------------------------------------------------------
    def files_of(self, tree: dict, sub: str) -> list[str]:
        return [p for p in tree if self.owner.get(p) == sub]

    def put(self, tree: dict, ops: list, path: str, content, sub: str | None = None) -> None:
        if isinstance(content, str):
            content = tuple(content.rstrip("\n").split("\n"))
        tree[path] = content
        if sub:
            self.owner.setdefault(path, sub)
        ops.append(("M", path, content))

    def touch(self, tree: dict, ops: list, path: str) -> None:
        self.put(tree, ops, path, self.content.modify(tree[path], path, self.owner[path]))

    def ordinary_ops(self, e, tree: dict) -> list[tuple]:
        r, c, ops = self.rnd, self.content, []
        files = self.files_of(tree, e.sub)
        movable = [p for p in files if not is_binary(p) and not p.startswith(PROTECTED_PREFIXES)
                   and posixpath.dirname(p) == SUB[e.sub].home]   # keeps MAINTAINERS mapping
        x = r.u()
        if x < 0.06 or not files:
            path = c.fresh_name(e.sub)
            self.put(tree, ops, path, c.new_text(path, e.sub), e.sub)
        elif x < 0.075 and len(movable) > 2:
            old = r.pick(movable)
            new = c.fresh_name(e.sub, like=old)
            self.owner[new] = e.sub
            ops.append(("R", old, new))
            tree[new] = tree.pop(old)
            self.touch(tree, ops, new)
        elif x < 0.085 and len(movable) > 3:
            old = r.pick(movable)
            del tree[old]
            ops.append(("D", old))
        else:
            pool = [p for p in files if not is_binary(p) or r.chance(0.1)] or files
            n = min(len(pool), 1 + r.weighted([0.6, 0.28, 0.12]))
            for path in r.sample(pool, n):
                self.touch(tree, ops, path)
        if r.chance(0.08):
            other = r.pick([s.key for s in SUBSYSTEMS if s.key in ("hal", "docs", "sched")
                            and s.key != e.sub])
            cands = [p for p in self.files_of(tree, other) if not is_binary(p)]
            if cands:
                self.touch(tree, ops, r.pick(cands))
        return ops

    def fix_ops(self, e, tree: dict, hint: list[str]) -> list[tuple]:
        r, ops = self.rnd, []
        files = [p for p in self.files_of(tree, e.sub) if not is_binary(p)]
        preferred = [p for p in hint if p in tree and not is_binary(p)
                     and self.owner.get(p) == e.sub]
        for path in r.sample(preferred or files, 1 if r.chance(0.8) else 2):
            self.touch(tree, ops, path)
        return ops

    def revert_ops(self, e, tree: dict) -> list[tuple]:
        ops: list[tuple] = []
        for path, (before, after) in self.snapshots.get(id(e.target), {}).items():
            if tree.get(path) != after:
                continue
            if before is None:
                del tree[path]
                ops.append(("D", path))
            else:
                self.put(tree, ops, path, before)
        return ops or self.fix_ops(e, tree, e.target.touched)

    def special_ops(self, e, tree: dict) -> list[tuple]:
        c, ops = self.content, []
        if e.kind == "initial":
            for s in SUBSYSTEMS:
                if s.starts <= day_of(e.t):
                    for path in s.files:
                        self.put(tree, ops, path, c.new(path, s.key), s.key)
            self.put(tree, ops, "README.md",
                     "# aurora-fw\n\nMotor-controller firmware of Halvard Motion Systems "
                     "(an invented company; demo data).\n", "root")
            self.put(tree, ops, ".gitignore", "build/\n*.o\n*.elf\n", "root")
            self.put(tree, ops, "MAINTAINERS", maintainers_text(False, False), "root")
        elif e.kind == "mqtt_intro":
            for path in SUB["mqtt"].files:
                self.put(tree, ops, path, c.new(path, "mqtt"), "mqtt")
            self.put(tree, ops, "MAINTAINERS", maintainers_text(True, False))
        elif e.kind == "mailmap":
            self.put(tree, ops, "MAINTAINERS", maintainers_text(True, True))
            self.put(tree, ops, ".mailmap", mailmap_text(), "root")
        elif e.kind == "policy":
            self.put(tree, ops, "docs/process/review-policy.md",
                     "# Review policy\n\nFrom 2022-07-01 every change needs at least one "
                     "Reviewed-by or Acked-by tag from someone other than its author.\n"
                     "Maintainers do not apply patches without one.\n", "docs")
        elif e.kind == "html":
            path = "tools/logview.py" if "tools/logview.py" in tree else c.fresh_name("tools")
            self.put(tree, ops, path, (*tree.get(path, ("# logview",)),
                                       "    line = html.escape(line)  # was rendered raw"),
                     "tools")
        return ops

    # -- driver -----------------------------------------------------------------------------
    def run(self) -> None:
        h, events = self.h, self.h.events
        self.w("feature done\n")
        main_tree: dict = {}
        topic_tree: dict = {}
        topic_changed: dict[str, None] = {}
        main_tip = topic_tip = fork = 0
        merges = {m.after: m for m in h.merges}
        tags = list(h.tags)
        prev_tag: str | None = None
        for i, e in enumerate(events):
            while tags and tags[0].t < e.t and main_tip:
                prev_tag = self.tag(tags.pop(0), main_tip, prev_tag)
            if e.window >= 0 and (i == 0 or events[i - 1].window != e.window):
                topic_tree, topic_changed, fork, topic_tip = dict(main_tree), {}, main_tip, 0
            on_topic = e.branch == "topic"
            tree = topic_tree if on_topic else main_tree
            before = {}
            if e.kind in SPECIAL_KINDS:
                ops = self.special_ops(e, tree)
            elif e.kind in ("fix", "unknown_fix"):
                ops = self.fix_ops(e, tree, e.fixes.intro.touched if e.fixes else [])
            elif e.kind == "revert":
                ops = self.revert_ops(e, tree)
            else:
                if id(e) in self.revert_targets:
                    before = dict(tree)
                ops = self.ordinary_ops(e, tree)
            e.touched = list(dict.fromkeys(op[1] for op in ops if op[0] != "R")) + \
                [op[2] for op in ops if op[0] == "R"]
            if id(e) in self.revert_targets:
                self.snapshots[id(e)] = {p: (before.get(p), tree.get(p)) for p in
                                         e.touched + [op[1] for op in ops if op[0] == "R"]}
            message = compose(e, self.sha)
            author = f"{ident(e.author, e.author_t, email_day=day_of(e.author_t))} " \
                     f"{e.author_t} {PERSON[e.author].tz}"
            committer = f"{ident(e.committer, e.t)} {e.t} {PERSON[e.committer].tz}"
            if on_topic:
                parent = topic_tip or fork
                e.mark = topic_tip = self.commit(TOPIC_REF, author, committer, message,
                                                 [parent], ops)
                topic_changed.update(dict.fromkeys(e.touched))
                topic_changed.update(dict.fromkeys(op[1] for op in ops if op[0] == "R"))
            else:
                e.mark = main_tip = self.commit("refs/heads/main", author, committer, message,
                                                [main_tip] if main_tip else [], ops)
            if i in merges:
                main_tip = self.merge(merges[i], main_tree, topic_tree, topic_changed,
                                      main_tip, topic_tip)
        while tags:
            prev_tag = self.tag(tags.pop(0), main_tip, prev_tag)
        self.w("done\n")
        self.flush()

    def merge(self, m, main_tree: dict, topic_tree: dict, changed: dict, main_tip: int,
              topic_tip: int) -> int:
        ops: list[tuple] = []
        for path in changed:
            if path in topic_tree:
                if main_tree.get(path) != topic_tree[path]:
                    main_tree[path] = topic_tree[path]
                    ops.append(("M", path, topic_tree[path]))
            elif path in main_tree:
                del main_tree[path]
                ops.append(("D", path))
        who = f"{ident(m.committer, m.t)} {m.t} {PERSON[m.committer].tz}"
        m.mark = self.commit("refs/heads/main", who, who, merge_message(m),
                             [main_tip, topic_tip], ops)
        return m.mark

    def tag(self, tag, target: int, previous: str | None) -> str:
        tag.mark = target
        who = f"{ident(RELEASE_MANAGER, tag.t)} {tag.t} {PERSON[RELEASE_MANAGER].tz}"
        self.w(f"tag {tag.name}\nfrom :{target}\ntagger {who}\n")
        self.data(tag_message(tag.name, previous).encode("utf-8"))
        return tag.name


SPECIAL_KINDS = ("initial", "mqtt_intro", "mailmap", "policy", "html")


def write_stream(history: History, fin: BinaryIO, fout: BinaryIO) -> None:
    Stream(history, fin, fout).run()

