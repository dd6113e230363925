"""The report as data: options, sections, figures, tables, flags.

Every writer (HTML, PDF, JSON, CSV) renders the same :class:`Report`, so what
an assessor reads in the PDF is what a pipeline reads in the JSON.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

import pandas as pd

from procmetrics.analyse.measures.periods import DEFAULT_PERIOD
from procmetrics.resampling import SEED

Period = Literal["month", "quarter", "year", "release"]
PERIODS: tuple[str, ...] = ("month", "quarter", "year", "release")


@dataclass(frozen=True)
class ReportOptions:
    """What the user asked for; recorded in the JSON and the manifest.

    ``policy`` is the ``--policy-date`` as given (a date or a revision);
    the resolved date lives on the report. ``unresolved_share_limit`` is the
    share of unresolved or ambiguous fix references above which every
    defect figure is flagged.
    """

    repo: str | None = None
    policy: str | None = None
    subsystems: tuple[str, ...] = ()
    period: str = DEFAULT_PERIOD
    claims_path: str | None = None
    level: float = 0.95
    unresolved_share_limit: float = 0.10
    min_n: int = 20
    seed: int = SEED
    pdf_engine: str = "auto"
    #: subsystems tested on their own in the before/after section when none are
    #: named and more than 20 have commits: the K largest with >= M commits on
    #: each side of the date (procmetrics.analyse.measures.selection)
    subsystem_limit: int = 12
    subsystem_min_commits: int = 30
    #: report metadata file (TOML; :mod:`procmetrics.report.meta`): printed, copied, not analysed
    meta_path: str | None = None
    #: URL template with ``{hash}`` that turns every commit hash into a link
    commit_url: str | None = None
    #: exact text in tables/*.csv (no leading ' before cells that start like a formula)
    raw_csv: bool = False
    #: ``--scope FILE[:NAME]``, ``--since``, ``--until`` (procmetrics.scope): the tables are
    #: cut once before any analysis; the file is copied into ``inputs/``
    scope: str | None = None
    since: str | None = None
    until: str | None = None
    #: the scope file claims take ``scope = "NAME"`` from (copied into ``inputs/``)
    scope_file: str | None = None

    def scope_label(self) -> dict[str, Any] | None:
        """The scope as the JSON records it: NAME and the file's SHA-256 (no file name or
        folder, so a rerun from the copy in ``inputs/`` records the same)."""
        if self.scope is None:
            return None
        import hashlib
        from pathlib import Path
        from procmetrics.scope.definition import split_spec

        file, name = split_spec(self.scope)
        try:
            digest: str | None = hashlib.sha256(Path(file).read_bytes()).hexdigest()
        except OSError:
            digest = None
        return {"name": name, "file_sha256": digest}
    #: carry-over exclusions file (TOML, :mod:`procmetrics.claims.carryover_source`)
    exclusions_path: str | None = None

    def to_dict(self) -> dict[str, Any]:
        """Options that change figures (no local paths: those go in the manifest)."""
        return {
            "repo": self.repo, "policy": self.policy, "subsystems": list(self.subsystems),
            "period": self.period, "level": self.level,
            "unresolved_share_limit": self.unresolved_share_limit,
            "min_n": self.min_n, "seed": self.seed,
            "subsystem_limit": self.subsystem_limit,
            "subsystem_min_commits": self.subsystem_min_commits,
            **({"raw_csv": True} if self.raw_csv else {}),
            **({"scope": self.scope_label()} if self.scope else {}),
            **({"since": self.since} if self.since else {}),
            **({"until": self.until} if self.until else {}),
        }


@dataclass(frozen=True)
class Flag:
    """An automatic warning attached to a figure, a table or the whole report.

    ``code`` is a key of ``CAVEAT_CODES``; ``target`` is a figure/table key or
    ``"report"``; ``source`` says where the flag came from (``"result"`` for a
    caveat or diagnostic recorded by the analysis, ``"store"`` for a check of
    the mined data, ``"report"`` for a rule of this report).
    """

    code: str
    severity: str
    target: str
    message: str
    source: str

    def to_dict(self) -> dict[str, Any]:
        return {"code": self.code, "severity": self.severity, "target": self.target,
                "message": self.message, "source": self.source}


@dataclass
class Figure:
    """One numbered figure: image, caption facts and the tidy data behind it."""

    key: str
    title: str
    caption: str
    n: int | None
    method: str
    interval: str
    data: pd.DataFrame
    png: bytes | None = None
    values: dict[str, Any] = field(default_factory=dict)
    flags: list[Flag] = field(default_factory=list)
    number: int = 0
    alt: str = ""
    #: what the figure rests on ("history", "trailers", "defects"): store-level flags use it
    kinds: tuple[str, ...] = ("history",)
    #: plain words for the commits its n leaves out (merges, empty commits), or ""
    denominator: str = ""

    def caption_line(self) -> str:
        n = "n not applicable" if self.n is None else f"n = {self.n:,}"
        return f"Figure {self.number}. {self.caption} ({n}; {self.method}; {self.interval})."


@dataclass
class Table:
    """A numbered table; ``columns`` are (key, heading with unit) pairs."""

    key: str
    title: str
    columns: list[tuple[str, str]]
    data: pd.DataFrame
    note: str = ""
    flags: list[Flag] = field(default_factory=list)
    number: int = 0
    #: columns holding shares (fractions in JSON and CSV) that the document shows in percent
    percent_columns: tuple[str, ...] = ()
    #: long listings (the defect ledger): rows go to the CSV and JSON only; HTML and
    #: PDF show the caption, the row count and the file name
    csv_only: bool = False


@dataclass
class Block:
    """A paragraph, a list of items, or a figure/table reference in a section."""

    kind: Literal["p", "list", "figure", "table", "note", "verdicts", "caution"]
    text: str = ""
    items: list[str] = field(default_factory=list)
    ref: str = ""


@dataclass
class Section:
    key: str
    title: str
    blocks: list[Block] = field(default_factory=list)
    number: int = 0

    def p(self, text: str) -> None:
        self.blocks.append(Block("p", text=text))

    def note(self, text: str) -> None:
        self.blocks.append(Block("note", text=text))

    def bullets(self, items: list[str]) -> None:
        if items:
            self.blocks.append(Block("list", items=list(items)))


@dataclass
class Report:
    """Everything the writers need; built by :func:`procmetrics.report.build.build_report`."""

    title: str
    options: ReportOptions
    scope: dict[str, Any]
    sections: list[Section] = field(default_factory=list)
    figures: dict[str, Figure] = field(default_factory=dict)
    tables: dict[str, Table] = field(default_factory=dict)
    flags: list[Flag] = field(default_factory=list)
    claims: list[dict[str, Any]] = field(default_factory=list)
    store_checksum: str = ""
    provenance: dict[str, Any] = field(default_factory=dict)
    #: document control data (:class:`procmetrics.report.meta.ReportMeta`), or None
    meta: Any = None
    #: evidence files to write: path relative to the folder -> rows
    evidence: dict[str, pd.DataFrame] = field(default_factory=dict)

    def add_figure(self, section: Section, fig: Figure) -> Figure:
        fig.number = len(self.figures) + 1
        self.figures[fig.key] = fig
        section.blocks.append(Block("figure", ref=fig.key))
        return fig

    def add_table(self, section: Section, table: Table) -> Table:
        table.number = len(self.tables) + 1
        self.tables[table.key] = table
        section.blocks.append(Block("table", ref=table.key))
        return table

    def add_section(self, key: str, title: str) -> Section:
        sec = Section(key, title, number=len(self.sections) + 1)
        self.sections.append(sec)
        return sec

    def all_flags(self) -> list[Flag]:
        """Report-level flags then figure and table flags, without duplicates."""
        seen: set[tuple[str, str, str]] = set()
        out: list[Flag] = []
        items = list(self.flags)
        for fig in self.figures.values():
            items.extend(fig.flags)
        for tab in self.tables.values():
            items.extend(tab.flags)
        for f in items:
            k = (f.code, f.target, f.message)
            if k not in seen:
                seen.add(k)
                out.append(f)
        return out
