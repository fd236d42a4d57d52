"""Decision records: what was done to the input, for the methods paragraph and for the user."""

from __future__ import annotations

from dataclasses import dataclass

from .._result import ResultMixin

__all__ = ["Decision"]


@dataclass(frozen=True, repr=False)
class Decision(ResultMixin):
    """One decision taken on the input tables.

    Attributes
    ----------
    action : str
        A short code: ``"drop-sites"``, ``"drop-variables"``, ``"drop-taxa"``, ``"censored"``,
        ``"encoding"``, ``"decimal-comma"``, ``"reorder"``, ``"crs"``, ``"site-column"``,
        ``"subset"``.
    detail : str
        The decision in words, ready for a methods paragraph.
    count : int
        How many sites, columns or cells it touched.
    sites, columns : tuple of str
        The site IDs and column names it touched (empty when not applicable).
    """

    action: str
    detail: str
    count: int = 0
    sites: tuple[str, ...] = ()
    columns: tuple[str, ...] = ()

    def __str__(self) -> str:
        return self.detail
