"""`procmetrics series`, `changes` and `compare` through the real entry point on a small
demo history, checked against plain git and the generator's ground truth."""
from __future__ import annotations

import json
import os
import re
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from procmetrics.analyse.measures.metrics import METRIC_COLUMNS
from procmetrics.cli import main

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def demo(tmp_path_factory) -> dict:
    base = tmp_path_factory.mktemp("series-demo")
    repo = base / "aurora-fw"
    subprocess.run([sys.executable, str(ROOT / "sample_repos" / "generate.py"), "--out",
                    str(repo), "--commits", "1200"], check=True, capture_output=True)
    store = base / "store.sqlite"
    assert main(["mine", str(repo), "--store", str(store)]) == 0
    truth = json.loads((base / "aurora-fw.truth.json").read_text())
    return {"repo": repo, "store": store, "truth": truth, "base": base}


def _git_count(repo: Path, *args: str) -> int:
    out = subprocess.run(["git", "-C", str(repo), "rev-list", "--count", *args, "HEAD"],
                         check=True, capture_output=True, text=True)
    return int(out.stdout.strip())


def test_series_table_csv_and_figures(demo, capsys):
    out = demo["base"] / "series"
    rc = main(["series", "--store", str(demo["store"]), "--period", "quarter",
               "--metric", "commits", "--metric", "review_coverage", "--out", str(out)])
    text = capsys.readouterr().out
    assert rc == 0
    assert "review_coverage [(all)]" in text and "trend:" in text
    table = pd.read_csv(out / "metrics.csv")
    assert list(table.columns) == METRIC_COLUMNS
    commits = table[(table.metric == "commits") & (table.subsystem == "(all)")]
    # plain git: non-merge commits of the whole history
    assert commits["value"].sum() == _git_count(demo["repo"], "--no-merges")
    assert (out / "series_review_coverage_all.png").stat().st_size > 0
    assert (out / "series_review_coverage_all.svg").stat().st_size > 0
    assert (out / "diagnostics_review_coverage_all.png").exists()


def test_changes_finds_the_planted_change(demo, capsys):
    rc = main(["changes", "--store", str(demo["store"]), "--period", "quarter",
               "--metric", "review_coverage", "--boot", "50"])
    text = capsys.readouterr().out
    assert rc == 0
    change = demo["truth"]["change"]["date"]          # 2022-07-01 -> quarter 2022Q3
    q = pd.Timestamp(change).to_period("Q")
    assert f"from {q.year}Q{q.quarter}" in text
    assert "penalty path" in text


def test_compare_at_planted_date_matches_truth(demo, capsys):
    t = demo["truth"]
    rc = main(["compare", "--store", str(demo["store"]), "--at", t["change"]["date"],
               "--metric", "review_coverage", "--resamples", "99", "--boot", "100"])
    text = capsys.readouterr().out
    assert rc == 0
    before, after = t["review"]["realised"]["before"], t["review"]["realised"]["after"]
    # reviewed share before/after exactly as the generator realised it (truth file)
    assert f"review_coverage: {before['share']:.3g} (n={before['commits']})" in text
    assert f"-> {after['share']:.3g} (n={after['commits']})" in text
    assert "change points in review_coverage: at declared date" in text
    assert "ITS review_coverage" in text


def test_compare_at_a_revision(demo, capsys):
    commit = demo["truth"]["change"]["commit"]
    rc = main(["compare", "--store", str(demo["store"]), "--at", commit[:12],
               "--metric", "review_coverage", "--resamples", "49", "--boot", "50"])
    assert rc == 0
    assert "before/after 2022-07-01" in capsys.readouterr().out


def test_compare_at_a_date_outside_the_history_is_refused(demo, capsys):
    """A date before the first or after the last commit leaves one side empty: every test
    would be skipped, so the command fails (insufficient data, exit 7) with one line
    naming the edge commit's date (oracle: git log), instead of ending as a success."""
    dates = subprocess.run(["git", "-C", str(demo["repo"]), "log", "--format=%cd",
                            "--date=format-local:%Y-%m-%d"], check=True, capture_output=True,
                           text=True, env={**os.environ, "TZ": "UTC"}).stdout.split()
    first, last = min(dates), max(dates)
    for at, side, edge in (("2099-01-01", "after", last), ("1999-01-01", "before", first)):
        rc = main(["compare", "--store", str(demo["store"]), "--at", at])
        cap = capsys.readouterr()
        assert rc == 7 and cap.out == ""
        assert cap.err.count("\n") == 1
        assert f"no commits {side} {at}" in cap.err and edge in cap.err


def test_missing_store_is_one_line(tmp_path, capsys):
    rc = main(["series", "--store", str(tmp_path / "none.sqlite")])
    err = capsys.readouterr().err
    assert rc == 5 and err.count("\n") == 1 and "store not found" in err


def test_distribution_figures_state_n_and_bin_width(tmp_path):
    import numpy as np

    from procmetrics.plot.distributions import plot_ecdf, plot_ecdf_facets, plot_histogram
    from procmetrics.plot.series import save_figure

    rng = np.random.default_rng(0)
    ax = plot_ecdf({"before": rng.normal(size=30), "after": rng.normal(size=20)},
                   quantity="lines per commit")
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert labels == ["before (n = 30)", "after (n = 20)"]
    ax = plot_histogram(rng.poisson(5, 100), bin_width=2, sqrt_counts=True)
    assert "bin width 2" in ax.get_xlabel() and "square-root" in ax.get_ylabel()
    frame = pd.DataFrame({"v": rng.normal(size=60), "period": ["a", "b"] * 30,
                          "subsystem": ["x"] * 40 + ["y"] * 20})
    fig = plot_ecdf_facets(frame, value="v", group="period", facet="subsystem")
    assert "n=60" in fig._suptitle.get_text()
    paths = save_figure(fig, tmp_path / "ecdf")
    assert [p.suffix for p in paths] == [".png", ".svg"] and all(p.exists() for p in paths)


def test_progress_goes_to_stderr_only_when_asked_or_on_a_terminal(demo, capsys):
    """Not a terminal (pytest captures stderr): silent by default; --progress prints
    the steps on stderr and leaves stdout as it was."""
    capsys.readouterr()
    assert main(["series", "--store", str(demo["store"]), "--metric", "commits"]) == 0
    quiet = capsys.readouterr()
    assert quiet.err == ""
    assert main(["series", "--store", str(demo["store"]), "--metric", "commits",
                 "--progress"]) == 0
    loud = capsys.readouterr()
    assert loud.out == quiet.out
    assert re.findall(r"^series: \[(\d)\] (.+?) \(", loud.err, re.M) == [
        ("1", "reading the store"), ("2", "per-period metrics")]


def test_progress_steps_estimate_the_time_left():
    import io

    from procmetrics import progress

    progress.advance("nobody listens")            # no command open: nothing happens
    buf = io.StringIO()
    with progress.steps("job", 3, enabled=True, stream=buf):
        progress.advance("one")
        progress.advance("two")
        progress.detail("half way")
        progress.advance("three")
    lines = buf.getvalue().splitlines()
    assert [ln.split(" (")[0] for ln in lines] == [
        "job: [1/3] one", "job: [2/3] two", "job: [2/3] two: half way", "job: [3/3] three"]
    assert "left" not in lines[0] and all("left" in ln for ln in lines[1:])
    with progress.steps("job", 3, enabled=False, stream=buf) as s:
        assert s is None
