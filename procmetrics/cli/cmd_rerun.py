"""``procmetrics rerun``: regenerate a report from its manifest and compare the figures."""
from __future__ import annotations

import argparse

from procmetrics.errors import EXIT_FIGURES_DIFFER as EXIT_DIFFERENT


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "rerun", help="regenerate a report from its manifest and compare the figures",
        description="Read manifest.json, reuse the recorded store if it still holds the same "
        "data (else mine the recorded repository again, at the recorded HEAD if the ref "
        "moved), write the report with the recorded options into a new folder, and compare "
        "report.json and tables/*.csv by SHA-256. Exit 0 when they match, "
        f"{EXIT_DIFFERENT} when they differ.")
    p.add_argument("manifest", metavar="MANIFEST", help="manifest.json of an earlier report, or its folder (paths in it are read "
                   "relative to the manifest, so a moved or copied folder reruns from any "
                   "working directory)")
    p.add_argument("--out", metavar="DIR",
                   help="folder for the new report (default: the old folder's name + '-rerun')")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from procmetrics.report.rerun import rerun  # heavy: imported when run

    result = rerun(args.manifest, args.out)
    print(result.summary())
    return 0 if result.matches else EXIT_DIFFERENT
