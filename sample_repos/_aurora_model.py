"""Plan of the aurora-fw demo history: who commits what and when, defects, fixes, merges.

Nothing here touches git; ``_aurora_stream`` turns the plan into a fast-import stream and
``History.truth`` summarises the plan (with the commit hashes git assigned) as ground truth.
"""
from __future__ import annotations

import datetime as dt
import math
import random
import statistics
from dataclasses import dataclass, field

from _aurora_data import PERSON, PEOPLE, SUB, SUBSYSTEMS, RELEASE_MANAGER, UTC

PROJECT = "aurora-fw"
DEFAULT_SEED = 4711
DEFAULT_COMMITS = 4000
MIN_COMMITS = 300

START = int(dt.datetime(2019, 1, 7, 9, 0, tzinfo=UTC).timestamp())
END = int(dt.datetime(2025, 6, 30, 17, 0, tzinfo=UTC).timestamp())
CHANGE_DATE = dt.date(2022, 7, 1)
CHANGE_T = int(dt.datetime(2022, 7, 1, tzinfo=UTC).timestamp())
DAY = 86400

# --- the planted process (generating parameters; see README.md) ---------------------------
P_REVIEW = {"before": 0.35, "after": 0.90}      # P(commit carries Reviewed-by/Acked-by)
P_TESTED = {"before": 0.10, "after": 0.30}      # P(Tested-by | reviewed)
P_DEFECT = {"before": 0.20, "after": 0.13}      # P(ordinary commit introduces a defect) x factor
LIFETIME = {"before": (120.0, 1.2), "after": (60.0, 1.2)}   # log-normal (median days, sigma)
FIXES_ADOPTION = ((dt.date(2019, 1, 1), 0.0), (dt.date(2019, 7, 1), 0.5),
                  (dt.date(2020, 1, 1), 0.92))  # P(a fix commit names its introducer)
P_SIGNOFF = 0.96
P_STABLE = 0.15                                 # Cc: stable on fixes that carry a Fixes line
P_LATE_APPLIED = 0.02                           # author date 30-200 days before commit date
MERGE_SHARE = 0.03

FIX_KINDS = ("short_hash_7", "short_hash_8", "full_hash_40", "fixes_commit_word",
             "subject_without_parentheses", "fixes_in_body", "two_introducers",
             "two_hashes_one_line", "fixes_key_lowercase")
ODD_KEYS = (("Signed-off-by", "Signed-Off-By:"), ("Reviewed-by", "Reviewed-By:"),
            ("Reviewed-by", "Reviewed-by :"), ("Acked-by", "Acked-By:"))  # (key, odd prefix)
SPECIALS = {  # kind -> (time, author key, subsystem)
    "initial": (START, "ines", "hal"),
    "mqtt_intro": (int(dt.datetime(2020, 3, 2, 10, 15, tzinfo=UTC).timestamp()), "priya", "mqtt"),
    "mailmap": (int(dt.datetime(2021, 4, 6, 8, 40, tzinfo=UTC).timestamp()), "kaito", "tools"),
    "policy": (CHANGE_T + 9 * 3600 + 1800, "ines", "docs"),
    "html": (int(dt.datetime(2023, 3, 14, 13, 5, tzinfo=UTC).timestamp()), "auden", "tools"),
}


class Rand:
    """All randomness, derived from ``random.Random.random()`` only (stable across versions)."""

    def __init__(self, seed: int) -> None:
        self._r = random.Random(seed)

    def u(self) -> float:
        return self._r.random()

    def below(self, n: int) -> int:
        return min(int(self._r.random() * n), n - 1)

    def pick(self, seq):
        return seq[self.below(len(seq))]

    def chance(self, p: float) -> bool:
        return self._r.random() < p

    def uniform(self, a: float, b: float) -> float:
        return a + (b - a) * self._r.random()

    def weighted(self, weights: list[float]) -> int:
        x, acc = self._r.random() * sum(weights), 0.0
        for i, w in enumerate(weights):
            acc += w
            if x < acc:
                return i
        return len(weights) - 1

    def sample(self, seq: list, k: int) -> list:
        idx = list(range(len(seq)))
        k = min(k, len(idx))
        for i in range(k):
            j = i + self.below(len(idx) - i)
            idx[i], idx[j] = idx[j], idx[i]
        return [seq[i] for i in idx[:k]]

    def lognormal_days(self, median: float, sigma: float) -> float:
        z = statistics.NormalDist().inv_cdf(min(max(self._r.random(), 1e-12), 1 - 1e-12))
        return median * math.exp(sigma * z)


def period(t: int) -> str:
    return "before" if t < CHANGE_T else "after"


def day_of(t: int) -> dt.date:
    return dt.datetime.fromtimestamp(t, UTC).date()


def iso(t: int) -> str:
    return dt.datetime.fromtimestamp(t, UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def adoption(t: int) -> float:
    d, p = day_of(t), 0.0
    for since, prob in FIXES_ADOPTION:
        if d >= since:
            p = prob
    return p


@dataclass(eq=False)
class Defect:
    id: int
    intro: "Event"
    lifetime_days: float           # drawn ("complete") lifetime, committer-date clock
    fix: "Event | None" = None


@dataclass(eq=False)
class Event:
    """One planned non-merge commit."""
    t: int                          # committer time (unix, UTC)
    kind: str                       # initial|regular|fix|revert|unknown_fix|special kinds
    sub: str
    seq: int = 0
    defect: Defect | None = None    # defect this commit introduces
    fixes: Defect | None = None     # defect this commit fixes
    target: "Event | None" = None   # revert target
    second: "Event | None" = None   # extra introducer named by a two-introducer fix
    fix_ref: str = "none"           # none | trailer | body  (where its Fixes line sits)
    messy: list[str] = field(default_factory=list)
    odd_key: tuple[str, str] | None = None
    stable: bool = False
    reporter: str = ""
    branch: str = "main"
    window: int = -1
    author: str = ""
    committer: str = ""
    author_t: int = 0
    reviewers: list[tuple[str, str]] = field(default_factory=list)   # (trailer key, person)
    tester: str = ""
    signoff: bool = True
    subject: str = ""
    body: list[str] = field(default_factory=list)
    unknown_hash: str = ""
    ref_subject: str = ""           # subject quoted by an unknown-target Fixes line
    fix_lines: list[str] = field(default_factory=list)   # Fixes lines as written
    touched: list[str] = field(default_factory=list)     # paths changed (set by the stream)
    mark: int = 0

    @property
    def period(self) -> str:
        return period(self.t)

    @property
    def reviewed(self) -> bool:
        return bool(self.reviewers)


@dataclass(eq=False)
class Merge:
    after: int                      # index of the last event of its window
    t: int
    name: str
    committer: str
    topic_subjects: list[str]
    mark: int = 0


@dataclass(eq=False)
class Tag:
    name: str
    t: int
    mark: int = 0                   # mark of the tagged commit (set by the stream)


@dataclass
class History:
    events: list[Event]
    merges: list[Merge]
    tags: list[Tag]
    defects: list[Defect]
    rand: Rand
    scratch_refs: tuple[str, ...] = ("refs/scratch/topic",)

    def truth(self, marks: dict[int, str], *, head: str, seed: int, requested: int) -> dict:
        from _aurora_truth import build_truth
        return build_truth(self, marks, head=head, seed=seed, requested=requested)


# --- planning ------------------------------------------------------------------------------

def _subsystems_at(t: int) -> list:
    d = day_of(t)
    return [s for s in SUBSYSTEMS if s.starts <= d]


def _ordinary(rnd: Rand, t: int, seq: int, defects: list[Defect], allow_defect: bool = True
              ) -> list[Event]:
    subs = _subsystems_at(t)
    s = subs[rnd.weighted([x.weight for x in subs])]
    ev = Event(t=t, kind="regular", sub=s.key, seq=seq)
    out = [ev]
    p = P_DEFECT[period(t)] * s.defect_factor
    if allow_defect and rnd.chance(p):
        median, sigma = LIFETIME[period(t)]
        d = Defect(id=len(defects), intro=ev, lifetime_days=rnd.lognormal_days(median, sigma))
        ev.defect = d
        defects.append(d)
        fix_t = t + int(round(d.lifetime_days * DAY))
        if fix_t <= END:
            fix = Event(t=fix_t, kind="fix", sub=s.key, seq=seq + 1, fixes=d)
            d.fix = fix
            out.append(fix)
    return out


def plan_history(seed: int, n_commits: int) -> History:
    rnd = Rand(seed)
    small = n_commits < 2000
    n_merges = max(1, round(n_commits * MERGE_SHARE))
    target = n_commits - n_merges                      # non-merge commits wanted
    n_reverts, n_unknown = (2, 1) if small else (4, 3)
    defects: list[Defect] = []
    events: list[Event] = []
    seq = 0
    for kind, (t, _, sub) in SPECIALS.items():
        events.append(Event(t=t, kind=kind, sub=sub, seq=seq))
        seq += 2
    n_regular = round((target - len(events) - n_reverts - n_unknown) / 1.15)
    for _ in range(n_regular):
        t = int(rnd.uniform(START + DAY, END))
        events += _ordinary(rnd, t, seq, defects)
        seq += 2
    plain = [e for e in events if e.kind == "regular" and e.defect is None and e.t < END - 30 * DAY]
    for tgt in rnd.sample(plain, n_reverts):
        events.append(Event(t=tgt.t + int(rnd.uniform(2 * 3600, 20 * DAY)), kind="revert",
                            sub=tgt.sub, seq=seq, target=tgt))
        seq += 2
    code = [s.key for s in SUBSYSTEMS if s.defect_factor > 0 and s.key != "mqtt"]
    for _ in range(n_unknown):
        t = int(rnd.uniform(day_to_t(dt.date(2020, 6, 1)), END))
        events.append(Event(t=t, kind="unknown_fix", sub=rnd.pick(code), seq=seq,
                            unknown_hash="".join(rnd.pick("0123456789abcdef") for _ in range(12))))
        seq += 2
    while len(events) < target:                       # top up to the exact size
        t = int(rnd.uniform(START + DAY, END))
        events += _ordinary(rnd, t, seq, defects, allow_defect=len(events) + 2 <= target)
        seq += 2
    if len(events) > target:                           # trim plain commits at random
        reverted = {id(e.target) for e in events if e.target is not None}
        spare = [e for e in events if e.kind == "regular" and e.defect is None
                 and id(e) not in reverted]
        drop = {id(e) for e in rnd.sample(spare, len(events) - target)}
        events = [e for e in events if id(e) not in drop]
    events.sort(key=lambda e: (e.t, e.seq))
    for i in range(1, len(events)):                    # strictly increasing committer times
        if events[i].t <= events[i - 1].t:
            events[i].t = events[i - 1].t + 1
    merges = _plan_merges(rnd, events, n_merges)
    _assign_people(rnd, events)
    _plant_messy(rnd, events, small)
    from _aurora_text import write_messages
    write_messages(rnd, events, merges)
    return History(events=events, merges=merges, tags=_plan_tags(rnd), defects=defects, rand=rnd)


def day_to_t(d: dt.date) -> int:
    return int(dt.datetime(d.year, d.month, d.day, tzinfo=UTC).timestamp())


def _plan_merges(rnd: Rand, events: list[Event], n_merges: int) -> list[Merge]:
    """Pick disjoint windows of 2-5 consecutive commits; some of each go on a topic branch."""
    n = len(events)
    block = (n - 2) // n_merges
    merges: list[Merge] = []
    for b in range(n_merges):
        lo, hi = 1 + b * block, 1 + (b + 1) * block - 1     # leave >= 1 commit after a window
        for _ in range(30):
            length = 2 + rnd.below(4)
            if hi - lo - length < 1:
                length = 2
            start = lo + rnd.below(max(1, hi - lo - length))
            span = events[start:start + length]
            if start + length < n and all(e.kind in ("regular", "fix", "revert", "unknown_fix")
                                          for e in span):
                break
        else:
            raise RuntimeError("could not place a merge window; use more --commits")
        wid = len(merges)
        for j, e in enumerate(span):
            e.window = wid
            dep = e.fixes.intro if e.fixes else e.target
            if j == 0:
                e.branch = "topic"
            elif dep is not None and dep.window == wid:
                e.branch = dep.branch
            else:
                e.branch = "topic" if rnd.chance(0.6) else "main"
        last = start + length - 1
        gap = events[last + 1].t - events[last].t
        topic = [e for e in span if e.branch == "topic"]
        s = SUB[topic[0].sub]
        noun = rnd.pick(s.nouns).lower().replace(" ", "-")
        merges.append(Merge(after=last, t=events[last].t + max(1, min(3600, gap // 2)),
                            name=f"{s.prefix.replace('/', '-')}-{noun}",
                            committer="", topic_subjects=[]))
        merges[-1].committer = s.maintainers[0] if PERSON[s.maintainers[0]].active(
            day_of(merges[-1].t)) else RELEASE_MANAGER
    return merges


def _active(t: int) -> list[str]:
    d = day_of(t)
    return [p.key for p in PEOPLE if p.active(d)]


def _assign_people(rnd: Rand, events: list[Event]) -> None:
    for e in events:
        active = _active(e.t)
        s = SUB[e.sub]
        if e.kind in SPECIALS:
            e.author = SPECIALS[e.kind][1]
        else:
            e.author = active[rnd.weighted([6.0 if e.sub in PERSON[k].affinity else 1.0
                                             for k in active])]
        maint = [m for m in s.maintainers if m in active]
        if e.author in maint or not maint or e.kind == "initial" or not rnd.chance(0.75):
            e.committer = e.author
        else:
            e.committer = rnd.pick(maint)
        if e.committer == e.author:
            e.author_t = e.t if rnd.chance(0.7) else e.t - int(rnd.uniform(60, 7200))
        else:
            e.author_t = e.t - int(rnd.uniform(600, 4 * DAY))
            if e.kind in ("regular", "fix") and rnd.chance(P_LATE_APPLIED):
                e.author_t = e.t - int(rnd.uniform(30 * DAY, 200 * DAY))
                e.messy.append("late_applied")
        e.signoff = e.kind == "initial" or rnd.chance(P_SIGNOFF)
        if e.kind != "initial" and rnd.chance(P_REVIEW[e.period]):
            others = [k for k in active if k != e.author]
            n_rev = 2 if rnd.chance(0.3) else 1
            chosen: list[str] = []
            for _ in range(n_rev):
                pool = [k for k in others if k not in chosen]
                chosen.append(pool[rnd.weighted([4.0 if k in s.maintainers else 1.0
                                                 for k in pool])])
            e.reviewers = [("Reviewed-by" if rnd.chance(0.8) else "Acked-by", k) for k in chosen]
            if rnd.chance(P_TESTED[e.period]):
                e.tester = rnd.pick(others)
        if e.kind == "fix":
            e.fix_ref = "trailer" if rnd.chance(adoption(e.t)) else "none"
            e.stable = e.fix_ref == "trailer" and rnd.chance(P_STABLE)
        if e.kind == "unknown_fix":
            e.fix_ref = "trailer"
        if e.kind in ("fix", "unknown_fix") and rnd.chance(0.2):
            e.reporter = rnd.pick(active)


def _visible_index(events: list[Event]) -> list[int]:
    """Index from which each commit is reachable from main (window end for topic commits)."""
    ends: dict[int, int] = {}
    for i, e in enumerate(events):
        if e.window >= 0:
            ends[e.window] = i
    return [ends[e.window] + 1 if e.branch == "topic" else i for i, e in enumerate(events)]


def _plant_messy(rnd: Rand, events: list[Event], small: bool) -> None:
    each = 2 if small else 4
    index = {id(e): i for i, e in enumerate(events)}
    visible = _visible_index(events)
    window_start: dict[int, int] = {}
    for i, e in enumerate(events):
        if e.window >= 0:
            window_start.setdefault(e.window, i)
    tagged = [e for e in events if e.kind == "fix" and e.fix_ref == "trailer"]
    pool = rnd.sample(tagged, len(tagged))
    for kind in FIX_KINDS:
        placed = 0
        while placed < each and pool:
            e = pool.pop()
            if kind in ("two_introducers", "two_hashes_one_line"):
                i = index[id(e)]
                base = window_start[e.window] if e.window >= 0 else i
                intro = e.fixes.intro
                cands = [c for c in events[:index[id(intro)]]
                         if c.sub == e.sub and c.kind in ("regular", "fix")
                         and visible[index[id(c)]] < base]
                if not cands:
                    continue
                e.second = rnd.pick(cands)
            e.messy.append(kind)
            if kind == "fixes_in_body":
                e.fix_ref = "body"
            placed += 1
    keyed = [e for e in events if e.kind != "initial" and e.signoff and e.reviewers]
    for canon, odd in ODD_KEYS:
        cands = [x for x in keyed if x.odd_key is None
                 and (canon == "Signed-off-by" or any(k == canon for k, _ in x.reviewers))]
        for e in rnd.sample(cands, max(1, each // 2)):
            e.odd_key = (canon, odd)
            e.messy.append("odd_key_spelling")
    selfc = [e for e in events if e.kind == "regular" and e.author == e.committer
             and "late_applied" not in e.messy]
    for e in rnd.sample(selfc, 2):
        e.author_t = e.t + int(rnd.uniform(1800, 7200))
        e.messy.append("author_after_committer")


def _plan_tags(rnd: Rand) -> list[Tag]:
    tags = []
    for year in range(2019, 2026):
        for q, month in enumerate((1, 4, 7, 10)):
            if year == 2019 and month == 1:
                continue
            minor = q - 1 if year == 2019 else q
            t = int(dt.datetime(year, month, 8 + rnd.below(12), 15, 0, tzinfo=UTC).timestamp())
            if t < END:
                tags.append(Tag(name=f"v{year - 2018}.{minor}", t=t))
    return tags
