"""The one rule that turns a bank name into a part of an output file name."""

from __future__ import annotations

__all__ = ["file_stem"]


def file_stem(name: str) -> str:
    """``name`` with every character other than letters, digits, ``-`` and ``_`` replaced by ``_``.

    Parameters
    ----------
    name : str
        A bank name from the case [unitless].

    Returns
    -------
    str
        The stem used in output names such as ``scan_<stem>.csv`` [unitless].
    """
    return "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in name)
