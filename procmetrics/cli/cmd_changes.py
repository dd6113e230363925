"""``procmetrics changes``: change points in the process series, with intervals."""
from __future__ import annotations

import argparse

from procmetrics.cli import _series_common as common
from procmetrics.validate import arg, check_nonnegative_int, check_positive

DEFAULT = ("review_coverage", "independent_review", "fix_ratio")


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("changes", help="change points with position intervals and "
                       "penalty robustness",
                       description="Detect level changes (PELT on variance-stabilised values, "
                       "penalty c * sigma^2 * ln n) with bootstrap intervals on each position, "
                       "levels before/after and the penalty path.")
    common.add_series_arguments(p)
    p.add_argument("--penalty", type=arg(check_positive, "--penalty"), default=4.0, metavar="C",
                   help="penalty factor c (default 4)")
    p.add_argument("--boot", type=arg(check_nonnegative_int, "--boot"), default=200, metavar="B", help="bootstrap replicates")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    import pandas as pd

    from procmetrics.analyse.change.changepoints import ChangePointConfig, changes_for_metric
    from procmetrics.errors import InsufficientData

    tables, name = common.load(args)
    pm = common.compute(args, tables)
    cfg = ChangePointConfig(c=args.penalty, n_boot=args.boot)
    print(f"{name}: change points per {args.period}; {cfg.method.upper()}, c={cfg.c:g}, "
          f"min_size={cfg.min_size}, jump=1, {cfg.n_boot} bootstrap replicates")
    common.print_data_quality(tables, args.metric or DEFAULT)
    rows = []
    for sub in pm.table["subsystem"].unique():
        for metric in args.metric or DEFAULT:
            try:
                r = changes_for_metric(pm.table, metric, sub, config=cfg)
            except InsufficientData as exc:
                print(f"\n{metric} [{sub}]: not searched ({exc})")
                continue
            print(f"\n{metric} [{sub}]: {len(r.changes)} change(s) in {r.n_periods} periods "
                  f"(sigma_hat={common.fmt(r.sigma_hat)}, {r.transform})")
            for c in r.changes:
                print(f"  from {c.period}: position interval {_d(c.date_low)} .. "
                      f"{_d(c.date_high)}, support {common.fmt(c.support)}; level "
                      f"{common.fmt(c.level_before.value)} [{common.fmt(c.level_before.low)}, "
                      f"{common.fmt(c.level_before.high)}] -> {common.fmt(c.level_after.value)} "
                      f"[{common.fmt(c.level_after.low)}, {common.fmt(c.level_after.high)}]; "
                      f"found for c in {{{', '.join(f'{x:g}' for x in c.c_detected)}}}"
                      + ("; TUNING-SENSITIVE" if c.tuning_sensitive else ""))
            path = ", ".join(f"c={p.c:g}:{p.n_changes}" for p in r.penalty_path.itertuples())
            print(f"  penalty path (number of changes): {path}")
            common.print_caveats(r.caveats, "  ")
            rows.append(r.table().assign(metric=metric, subsystem=sub))
    out = common.out_dir(args)
    if out is not None and rows:
        pd.concat(rows).to_csv(out / "change_points.csv", index=False,
                               date_format="%Y-%m-%dT%H:%M:%SZ")
    return 0


def _d(ts) -> str:
    return "-" if ts is None else f"{ts:%Y-%m-%d}"
