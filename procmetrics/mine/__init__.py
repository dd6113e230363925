"""Mining: the only package that runs git.

Library entry point::

    from procmetrics.mine import MineOptions, mine_repository
    summary = mine_repository("path/to/clone", store="metrics.sqlite",
                              options=MineOptions(ref="main", line_counts=False))
"""
from procmetrics.mine.miner import mine_repository
from procmetrics.mine.options import MineOptions, MiningSummary

__all__ = ["mine_repository", "MineOptions", "MiningSummary"]
