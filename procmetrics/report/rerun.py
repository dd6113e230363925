"""Regenerate a report from its manifest and say whether the figures match.

Steps: read ``manifest.json``; reuse the recorded store when it still holds the
same data (same checksum of the tidy tables), otherwise mine the recorded
repository again into a fresh store in the new folder, at the recorded ref when
it still points at the recorded HEAD, else at the recorded HEAD commit itself
(and say that HEAD moved); build the report with the recorded options; compare
the SHA-256 of ``report.json`` and every ``tables/*.csv`` with the manifest,
and for ``report.json`` name the figures and tables whose numbers differ.

This module orchestrates mining and reporting, so it imports
:mod:`procmetrics.mine` (lazily); nothing else in ``report`` does.
"""
from __future__ import annotations

import datetime as dt
import json
import shutil
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from procmetrics.errors import ConfigError, ProcmetricsError
from procmetrics.errors import EXIT_FIGURES_DIFFER
from procmetrics.report.manifest import read_manifest, sha256_file
from procmetrics.report.model import ReportOptions

#: exit status of ``procmetrics rerun`` when the regenerated figures differ
EXIT_DIFFERENT = EXIT_FIGURES_DIFFER
#: tables and JSON parts that describe how the data was obtained, not the figures
PROVENANCE_TABLES = ("scope-facts", "mining-runs", "numerical-warnings")
PROVENANCE_PARTS = ("scope", "provenance")


@dataclass(frozen=True)
class RerunResult:
    out: Path
    store: str
    remined: bool
    head_moved: str | None
    matches: bool
    compared: int
    differences: tuple[str, ...] = field(default_factory=tuple)
    notes: tuple[str, ...] = field(default_factory=tuple)
    provenance_differences: tuple[str, ...] = field(default_factory=tuple)

    def summary(self) -> str:
        lines = [f"regenerated report in {self.out}"]
        lines += [f"note: {n}" for n in self.notes]
        if self.head_moved:
            lines.append(f"HEAD moved: {self.head_moved}")
        lines.append(("store re-mined into " if self.remined else "store reused: ") + self.store)
        if self.matches and not self.provenance_differences:
            lines.append(f"figures match: {self.compared} JSON/CSV files identical "
                         "(SHA-256)")
        elif self.matches:
            lines.append("figures match; only the provenance differs:")
            lines += [f"  - {d}" for d in self.provenance_differences]
        else:
            lines.append(f"figures DIFFER: {len(self.differences)} difference(s) in "
                         f"{self.compared} compared files")
            lines += [f"  - {d}" for d in self.differences]
        return "\n".join(lines)


def _options(man: dict[str, Any], *, claims: str | None = None,
             meta: str | None = None, where: str | None = None,
             scope: str | None = None, scope_file: str | None = None,
             excl: str | None = None) -> ReportOptions:
    """The recorded report options, each number checked by the one validator the
    command line uses (a tampered manifest ends in exit 2 naming the key)."""
    from procmetrics.validate import check_count, check_level, check_seed

    o = man.get("report_options") or {}
    if not isinstance(o, dict):
        raise ConfigError("must be an object", path=where, key="report_options")

    def num(check, key, default):
        try:
            return check(o.get(key, default), f"report_options.{key}")
        except ConfigError as exc:
            raise ConfigError(str(exc), path=where, key=f"report_options.{key}") from None

    return ReportOptions(repo=o.get("repo"), policy=o.get("policy"),
                         subsystems=tuple(o.get("subsystems") or ()),
                         period=o.get("period", "quarter"), claims_path=claims,
                         level=num(check_level, "level", 0.95),
                         unresolved_share_limit=num(check_level, "unresolved_share_limit",
                                                    0.10),
                         min_n=num(check_count, "min_n", 20),
                         seed=num(check_seed, "seed", 20240601),
                         pdf_engine=o.get("pdf_engine", "auto"),
                         subsystem_limit=num(check_count, "subsystem_limit", 12),
                         subsystem_min_commits=num(check_count, "subsystem_min_commits", 30),
                         meta_path=meta, commit_url=o.get("commit_url"),
                         raw_csv=bool(o.get("raw_csv", False)), scope=scope,
                         since=o.get("since"), until=o.get("until"), scope_file=scope_file,
                         exclusions_path=excl)


def _input_file(rec: dict[str, Any] | None, folder: Path, what: str, key: str,
                notes: list[str]) -> str | None:
    """An input recorded in the manifest: the copy in the folder, else the original.

    A copy is found relative to the manifest's folder, wherever the folder now is
    and whatever the working directory; the original path is only a fallback
    (older manifests recorded it relative to where ``report`` ran).
    """
    if not rec:
        return None
    rel = rec.get("path")
    candidates = []
    if rel:
        candidates.append(folder / rel)
    if rec.get("original_path"):
        candidates.append(Path(rec["original_path"]))
    elif rel:
        candidates.append(Path(rel))
    for c in candidates:
        if c.is_file():
            if rec.get("sha256") and sha256_file(c) != rec["sha256"]:
                notes.append(f"the {what} {c} changed since the report was made")
            return str(c.resolve())
    raise ConfigError(f"the {what} recorded in the manifest is gone (looked for "
                      + " and ".join(str(c) for c in candidates) + ")", key=key)


def _store_candidates(store: dict[str, Any], folder: Path) -> list[str]:
    """The recorded store: relative to the manifest first, then the absolute URL."""
    out = []
    if store.get("path"):
        p = (folder / store["path"])
        if p.is_file():
            out.append("sqlite:///" + str(p.resolve()))
    if store.get("url"):
        out.append(store["url"])
    return list(dict.fromkeys(out))


def _store_still_matches(url: str, repo: str | None, checksum: str) -> bool:
    from procmetrics.store.repodata import choose_repo, load_store_data, store_checksum
    from procmetrics.analyse.measures.vocabulary import REPORT_TRAILER_KEYS
    from procmetrics.store import open_store

    if "***" in url:       # a password was hidden in the manifest: cannot reconnect
        return False
    try:
        engine = open_store(url, create=False, readonly=True)
    except ProcmetricsError:
        return False
    try:
        data = load_store_data(engine, choose_repo(engine, repo),
                               trailer_keys=REPORT_TRAILER_KEYS)
        return store_checksum(data) == checksum
    except ProcmetricsError:
        return False
    finally:
        engine.dispose()


def _mine_options(run: dict[str, Any], ref: str, rules_copy: Path | None = None) -> Any:
    from procmetrics.mine import MineOptions

    o = run.get("options_json") or {}
    if isinstance(o, str):
        o = json.loads(o)

    def when(epoch: Any) -> Any:
        return None if epoch is None else dt.datetime.fromtimestamp(int(epoch), dt.timezone.utc)

    return MineOptions(ref=ref, since=when(o.get("since")), until=when(o.get("until")),
                       line_counts=bool(o.get("line_counts", True)),
                       merge_files=o.get("merge_files", "none"),
                       subsystem_rules=(str(rules_copy) if rules_copy is not None
                                        and rules_copy.is_file()
                                        else o.get("subsystem_rules")),
                       use_maintainers=bool(o.get("use_maintainers", True)),
                       prefix_depth=int(o.get("prefix_depth", 1)),
                       repo_name=o.get("repo_name"), batch_size=int(o.get("batch_size", 5000)),
                       progress=False)


def _json_differences(old: Path | None, new: Path) -> list[str]:
    """Figure and table keys whose JSON differs (when the old JSON is still on disk)."""
    if old is None or not old.exists():
        return []
    a, b = json.loads(old.read_text("utf-8")), json.loads(new.read_text("utf-8"))
    out = []
    for part in ("figures", "tables"):
        fa = {x["key"]: x for x in a.get(part, [])}
        fb = {x["key"]: x for x in b.get(part, [])}
        for k in sorted(set(fa) | set(fb)):
            if fa.get(k) != fb.get(k):
                out.append(f"report.json: {part[:-1]} '{k}' "
                           + ("missing now" if k not in fb else "new" if k not in fa
                              else "numbers differ"))
    for key in ("scope", "provenance", "claims", "flags", "store_checksum", "options"):
        if a.get(key) != b.get(key):
            out.append(f"report.json: '{key}' differs")
    return out


def rerun(manifest_path: str | Path, out: str | Path | None = None) -> RerunResult:
    """Regenerate the report described by a manifest (see the module docstring).

    Works from any working directory and on a folder moved or copied elsewhere:
    every path is first looked up relative to the manifest. A folder this call
    creates is removed again when the rerun fails, so a failure leaves nothing.
    """
    mpath = Path(manifest_path)
    if mpath.is_dir():
        mpath = mpath / "manifest.json"
    man = read_manifest(mpath)
    old_dir = mpath.parent.resolve()
    runs = man.get("mining_runs") or []
    repo = man.get("repository") or {}
    if not isinstance(repo, dict):
        raise ConfigError("must be an object", path=str(mpath), key="repository")
    if not runs or not isinstance(runs, list) or not all(isinstance(r, dict) for r in runs):
        raise ConfigError("the manifest records no mining run", path=str(mpath),
                          key="mining_runs")
    new_dir = Path(out) if out is not None else old_dir.with_name(old_dir.name + "-rerun")
    if new_dir.resolve() == old_dir:
        raise ConfigError("the rerun folder must differ from the original report folder",
                          key="--out")
    from procmetrics.report.outdir import check_target
    check_target(new_dir, overwrite=True, adopt=("procmetrics.sqlite",))
    notes: list[str] = []
    claims = _input_file(man.get("claims_file"), old_dir, "claims file", "claims_file", notes)
    inputs = man.get("inputs") or {}
    meta = _input_file(inputs.get("report_meta"), old_dir, "report metadata file",
                       "inputs.report_meta", notes)
    scope = _input_file(inputs.get("scope"), old_dir, "scope file", "inputs.scope", notes)
    if scope is not None and (inputs.get("scope") or {}).get("name"):
        scope = f"{scope}:{inputs['scope']['name']}"
    scope_file = _input_file(inputs.get("scope_file"), old_dir, "scope file",
                             "inputs.scope_file", notes)
    excl = _input_file(inputs.get("carryover_exclusions"), old_dir,
                       "carry-over exclusions file", "inputs.carryover_exclusions", notes)
    created = not new_dir.exists()
    try:
        return _rerun_into(man, mpath, old_dir, new_dir, _options(man, claims=claims, meta=meta,
                                                                  where=str(mpath),
                                                                  scope=scope,
                                                                  scope_file=scope_file,
                                                                  excl=excl),
                           notes, runs)
    except BaseException:
        if created and new_dir.exists():
            shutil.rmtree(new_dir, ignore_errors=True)
        raise


def _repository_path(man: dict[str, Any], folder: Path) -> str | None:
    repo = man.get("repository") or {}
    for cand in (repo.get("path"), repo.get("path_relative")):
        if not cand:
            continue
        p = Path(cand) if Path(cand).is_absolute() else folder / cand
        if p.exists():
            return str(p)
    return repo.get("path")


def _rerun_into(man: dict[str, Any], mpath: Path, old_dir: Path, new_dir: Path,
                opts: ReportOptions, notes: list[str], runs: list[dict[str, Any]]
                ) -> RerunResult:
    from procmetrics.report.build import make_report

    last = [r for r in runs if r.get("status") == "complete"][-1:] or runs[-1:]
    run = last[0]
    head, ref = run.get("head_hash"), run.get("ref") or "HEAD"
    store = man.get("store")
    if not isinstance(store, dict) or not isinstance(store.get("url"), str) \
            or not isinstance(store.get("checksum_sha256"), str):
        raise ConfigError("the manifest records no store (url and checksum_sha256)",
                          path=str(mpath), key="store")
    head_moved = None
    remined = False
    store_url = next((u for u in _store_candidates(store, old_dir)
                      if _store_still_matches(u, opts.repo, store["checksum_sha256"])), None)
    new_dir.mkdir(parents=True, exist_ok=True)
    if store_url is None:
        from procmetrics.mine import mine_repository
        from procmetrics.mine.git import GitRepo

        path = _repository_path(man, old_dir)
        if not path:
            raise ConfigError("the manifest records no repository path", path=str(mpath),
                              key="repository.path")
        git = GitRepo.open(path)
        now = git.resolve_commit(ref)
        mine_ref = ref
        if head and now != head:
            head_moved = (f"{ref} now points at {now[:12]}, the report was made at "
                          f"{head[:12]}; re-mined at {head[:12]}")
            mine_ref = head
        notes.append("the recorded store is gone or holds different data")
        store_url = str(new_dir / "procmetrics.sqlite")
        Path(store_url).unlink(missing_ok=True)
        rules = (man.get("inputs") or {}).get("subsystem_rules") or {}
        rules_copy = old_dir / rules["path"] if rules.get("path") else None
        mine_repository(path, store=store_url,
                        options=_mine_options(run, mine_ref, rules_copy))
        remined = True
    # the rerun folder is this command's own: an earlier rerun there is replaced; a
    # store re-mined into it moves into the new folder
    files = make_report(store_url, new_dir, opts, overwrite=True,
                        adopt=("procmetrics.sqlite",) if remined else ())
    new_man = json.loads(files.manifest.read_text("utf-8"))
    old_out, new_out = man.get("outputs", {}), new_man.get("outputs", {})
    compared = [n for n in sorted(set(old_out) | set(new_out))
                if n.endswith(".json") or n.endswith(".csv")]
    diffs: list[str] = []
    for name in compared:
        if name not in new_out:
            diffs.append(f"{name}: not produced now")
        elif name not in old_out:
            diffs.append(f"{name}: new file")
        elif old_out[name] != new_out[name]:
            diffs.append(f"{name}: content differs")
    prov: list[str] = []
    if "report.json: content differs" in diffs:
        old_json = old_dir / "report.json"
        same_file = old_json.exists() and sha256_file(old_json) == old_out.get("report.json")
        detail = _json_differences(old_json if same_file else None, files.json)
        if detail:   # the old JSON is at hand: say exactly what differs
            diffs.remove("report.json: content differs")
            diffs += detail
    for d in list(diffs):
        if (any(f"-{t}.csv" in d or f"'{t}'" in d for t in PROVENANCE_TABLES)
                or any(d == f"report.json: '{k}' differs" for k in PROVENANCE_PARTS)):
            diffs.remove(d)
            prov.append(d)
    return RerunResult(new_dir, store_url, remined, head_moved, not diffs, len(compared),
                       tuple(diffs), tuple(notes), tuple(prov))
