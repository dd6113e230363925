"""The store: the only package that talks SQL.

``open_store(url_or_path)`` gives an :class:`~sqlalchemy.engine.Engine` with the
schema checked; :mod:`procmetrics.store.tables` turns it into tidy DataFrames.
"""
from procmetrics.store.engine import open_store, resolve_url, DEFAULT_STORE_NAME
from procmetrics.store.schema import SCHEMA_VERSION

__all__ = ["open_store", "resolve_url", "DEFAULT_STORE_NAME", "SCHEMA_VERSION"]
