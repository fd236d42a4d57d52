"""Errors raised by :mod:`gradients`.

Every problem with a user's input is an :class:`InputError`. Its message names the file, the
site(s) and the column(s) involved and says what to do about it, so that an ecologist can fix the
table without reading a traceback.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

__all__ = ["InputError", "format_items"]


class InputError(ValueError):
    """Bad input: a table, file, argument or option that cannot be analysed as given.

    Parameters
    ----------
    message : str
        What is wrong, where (file, site, column) and how to fix it.
    file : str, optional
        The file the problem was found in.
    sites, columns : sequence of str, optional
        The site labels and column names involved; kept as attributes so that programs can act
        on them as well as people.
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        sites: Sequence[object] | None = None,
        columns: Sequence[object] | None = None,
    ) -> None:
        super().__init__(message)
        self.file = file
        self.sites = tuple(sites) if sites is not None else ()
        self.columns = tuple(columns) if columns is not None else ()


def format_items(items: Iterable[object], *, limit: int = 10, quote: bool = True) -> str:
    """List items for an error message, ``'a', 'b', 'c' and 7 more``."""
    items = list(items)
    shown = [repr(str(i)) if quote else str(i) for i in items[:limit]]
    text = ", ".join(shown)
    if len(items) > limit:
        text += f" and {len(items) - limit} more"
    return text
