"""The lifetime analysis in a second process changes nothing in the report
(oracle: the same report built in one process), and the helper's fallbacks."""
from __future__ import annotations

import math
import operator
import warnings

import pytest

from procmetrics import background
from procmetrics.report import sec_defects
from procmetrics.background import AsideJob
from procmetrics.report.build import build_report, numerical_warnings
from procmetrics.report.jsonout import dumps, report_dict
from procmetrics.report.model import ReportOptions

from tests.report.synth import synth


def test_value_comes_from_the_second_process():
    job = AsideJob(math.comb, 60, 30)
    assert job.result() == 118264581564861424
    assert job.ran_aside


def test_its_warnings_are_raised_again_here():
    job = AsideJob(warnings.warn, "a note from the second process", RuntimeWarning)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        assert job.result() is None
    assert job.ran_aside
    assert [(w.category, str(w.message)) for w in caught] == [
        (RuntimeWarning, "a note from the second process")]


def test_replayed_warnings_follow_the_filters_here():
    """Under "default" a warning from one place is shown once, as in one process; under
    "always" (the report's recorder) every one counts."""
    notes = [(RuntimeWarning, "overflow", "/lib/numeric.py", 7)] * 3 + [
        (RuntimeWarning, "overflow", "/lib/numeric.py", 9)]
    for action, expected in (("default", 2), ("always", 4)):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter(action)
            background.replay(notes, {})
        assert len(caught) == expected, action


def test_a_failure_there_is_raised_here_by_running_it_here():
    job = AsideJob(operator.truediv, 1, 0)
    with pytest.raises(ZeroDivisionError):
        job.result()
    assert not job.ran_aside


def test_without_a_second_process_it_runs_here(monkeypatch):
    def no_process(*a, **k):
        raise OSError("no processes on this machine")

    monkeypatch.setattr(background.subprocess, "Popen", no_process)
    job = AsideJob(math.factorial, 20)
    assert job.result() == 2432902008176640000
    assert not job.ran_aside


def test_a_print_there_does_not_spoil_the_result():
    job = AsideJob(print, "a library that prints")
    assert job.result() is None
    assert job.ran_aside


def test_a_closed_job_still_gives_its_value():
    job = AsideJob(math.gcd, 462, 1071)
    job.close()                      # the report stopped early, then asked after all
    assert job.result() == 21


@pytest.mark.slow
def test_report_is_the_same_with_the_lifetimes_aside(monkeypatch):
    data = synth(seed=31, n_commits=600)
    opts = ReportOptions(policy="2022-01-01", pdf_engine="none")
    with warnings.catch_warnings(record=True) as one_caught:
        warnings.simplefilter("always")
        one = build_report(data, opts, jobs=1)
    asked: list[bool] = []
    real_result = AsideJob.result

    def spy(self):
        value = real_result(self)
        asked.append(self.ran_aside)
        return value

    monkeypatch.setattr(sec_defects, "ASIDE_MIN_DEFECTS", 0)
    monkeypatch.setattr(AsideJob, "result", spy)
    with warnings.catch_warnings(record=True) as two_caught:
        warnings.simplefilter("always")
        two = build_report(data, opts, jobs=2)
    assert asked == [True]           # the analysis did run in the second process
    assert dumps(report_dict(two, {})) == dumps(report_dict(one, {}))
    assert two.figures["lifetime-curves"].n == one.figures["lifetime-curves"].n > 40
    assert numerical_warnings(list(two_caught)).equals(numerical_warnings(list(one_caught)))


def test_a_script_without_a_main_guard_runs_once(tmp_path):
    """multiprocessing's 'spawn' imports the caller's main script again in the child, so
    a notebook-style script without ``if __name__ == "__main__"`` would run twice."""
    import subprocess
    import sys
    from pathlib import Path

    log = tmp_path / "runs.txt"
    script = tmp_path / "unguarded.py"
    script.write_text(
        "import math\n"
        "from procmetrics.background import AsideJob\n"
        f"open({str(log)!r}, 'a').write('ran\\n')\n"
        "job = AsideJob(math.factorial, 10)\n"
        "assert job.result() == 3628800 and job.ran_aside\n", encoding="utf-8")
    root = str(Path(background.__file__).resolve().parents[1])
    subprocess.run([sys.executable, str(script)], check=True, cwd=tmp_path,
                   env={"PATH": "/usr/bin:/bin", "PYTHONPATH": root})
    assert log.read_text().splitlines() == ["ran"]
