"""Commit subjects, bodies and trailer blocks for the aurora-fw demo history."""
from __future__ import annotations

import datetime as dt
from typing import Callable

from _aurora_data import (BODY_FEATURE, BODY_FIX, BUGS, DOCS_VERBS, FEATURE_VERBS, FIX_VERBS,
                          PERSON, REVERT_REASONS, STABLE_ADDRESS, SUB, UTC)

SPECIAL_MESSAGES = {
    "initial": ("Import aurora-fw 0.9 from the internal repository",
                ["History before this point lived in the previous version control system "
                 "and is not carried over."]),
    "mqtt_intro": ("mqtt: add MQTT client for the telemetry gateway",
                   ["A small MQTT 3.1.1 client so the drive can publish telemetry. "
                    "Adds a MAINTAINERS section for it."]),
    "mailmap": ("MAINTAINERS: update Kaito Brennholt's address, add .mailmap",
                ["Kaito now works on aurora-fw through his own consultancy. The .mailmap "
                 "entry maps the old company address to the new one."]),
    "policy": ("docs: make review mandatory for every change",
               ["From 1 July 2022 every patch needs at least one review tag from someone "
                "other than its author before a maintainer applies it.",
                "The rules are in docs/process/review-policy.md."]),
    "html": ("tools: escape <script>alert(1)</script> &amp; other markup in logview output",
             ["Log lines are now shown as text, so a message such as <b>fault</b> "
              "no longer renders bold in the HTML view."]),
}


def _fmt(template: str, rnd, nouns) -> str:
    return template.format(n=rnd.pick(nouns), b=rnd.pick(BUGS))


def write_messages(rnd, events, merges) -> None:
    """Fill in subject and body of every planned commit and the merge summaries."""
    for e in events:
        s = SUB[e.sub]
        if e.kind in SPECIAL_MESSAGES:
            e.subject, e.body = SPECIAL_MESSAGES[e.kind][0], list(SPECIAL_MESSAGES[e.kind][1])
        elif e.kind == "regular":
            verbs = DOCS_VERBS if e.sub == "docs" else FEATURE_VERBS
            e.subject = f"{s.prefix}: {_fmt(rnd.pick(verbs), rnd, s.nouns)}"
            n = 1 + rnd.below(2)
            e.body = [" ".join(_fmt(rnd.pick(BODY_FEATURE), rnd, s.nouns) for _ in range(n))]
        elif e.kind in ("fix", "unknown_fix"):
            e.subject = f"{s.prefix}: {_fmt(rnd.pick(FIX_VERBS), rnd, s.nouns)}"
            e.body = [_fmt(rnd.pick(BODY_FIX), rnd, s.nouns)]
            if e.kind == "unknown_fix":
                e.ref_subject = f"{s.prefix}: {_fmt(rnd.pick(FEATURE_VERBS), rnd, s.nouns)}"
        elif e.kind == "revert":
            e.subject = f'Revert "{e.target.subject}"'
            e.body = [rnd.pick(REVERT_REASONS)]
    for m in merges:
        lo = m.after
        while lo - 1 >= 0 and events[lo - 1].window == events[m.after].window:
            lo -= 1
        m.topic_subjects = [e.subject for e in events[lo:m.after + 1] if e.branch == "topic"]


def ident(key: str, t: int, *, email_day: dt.date | None = None) -> str:
    p = PERSON[key]
    day = email_day or dt.datetime.fromtimestamp(t, UTC).date()
    return f"{p.name} <{p.email_at(day)}>"


def _fixes_lines(e, sha: Callable) -> list[str]:
    if e.kind == "unknown_fix":
        return [f'Fixes: {e.unknown_hash} ("{e.ref_subject}")']
    intro = e.fixes.intro
    h, subj = sha(intro), intro.subject
    kinds = set(e.messy)
    if "short_hash_7" in kinds:
        return [f'Fixes: {h[:7]} ("{subj}")']
    if "short_hash_8" in kinds:
        return [f'Fixes: {h[:8]} ("{subj}")']
    if "full_hash_40" in kinds:
        return [f'Fixes: {h} ("{subj}")']
    if "fixes_commit_word" in kinds:
        return [f'Fixes: commit {h[:12]} ("{subj}")']
    if "subject_without_parentheses" in kinds:
        return [f"Fixes: {h[:12]} {subj}"]
    if "fixes_key_lowercase" in kinds:
        return [f'fixes: {h[:12]} ("{subj}")']
    if "two_introducers" in kinds:
        h2 = sha(e.second)
        return [f'Fixes: {h2[:12]} ("{e.second.subject}")', f'Fixes: {h[:12]} ("{subj}")']
    if "two_hashes_one_line" in kinds:
        h2 = sha(e.second)
        return [f'Fixes: {h2[:12]} ("{e.second.subject}"), {h[:12]} ("{subj}")']
    return [f'Fixes: {h[:12]} ("{subj}")']


def compose(e, sha: Callable) -> str:
    """The full commit message of planned commit ``e``; ``sha(event)`` gives a full hash."""
    paras = list(e.body)
    if e.kind == "revert":
        paras = [f"This reverts commit {sha(e.target)}.", *paras]
    e.fix_lines = _fixes_lines(e, sha) if e.fix_ref != "none" else []
    if e.fix_ref == "body":
        paras = [paras[0], "\n".join(e.fix_lines),
                 "The regression only shows up with the bench firmware configuration, "
                 "which is why it went unnoticed."]
    trailers = list(e.fix_lines) if e.fix_ref == "trailer" else []
    if e.reporter:
        trailers.append(f"Reported-by: {ident(e.reporter, e.t)}")
    if e.stable:
        trailers.append(f"Cc: {STABLE_ADDRESS}")
    if e.signoff:
        trailers.append(f"Signed-off-by: {ident(e.author, e.author_t)}")
    trailers += [f"{key}: {ident(who, e.t)}" for key, who in e.reviewers]
    if e.tester:
        trailers.append(f"Tested-by: {ident(e.tester, e.t)}")
    if e.signoff and e.committer != e.author:
        trailers.append(f"Signed-off-by: {ident(e.committer, e.t)}")
    if e.odd_key is not None:
        canon, odd = e.odd_key
        for i, line in enumerate(trailers):
            if line.startswith(canon + ":"):
                trailers[i] = odd + line[len(canon) + 1:]
                break
    text = e.subject + "\n\n" + "\n\n".join(paras) + "\n"
    if trailers:
        text += "\n" + "\n".join(trailers) + "\n"
    return text


def merge_message(m) -> str:
    items = "\n".join(f"  * {s}" for s in m.topic_subjects)
    return f"Merge branch '{m.name}'\n\nTopic branch '{m.name}':\n\n{items}\n"


def tag_message(name: str, previous: str | None) -> str:
    since = f" since {previous}" if previous else ""
    return (f"aurora-fw {name}\n\nQuarterly release of the aurora-fw motor-controller "
            f"firmware. See docs/ for the changes{since}.\n")
