"""Several step tables of the same layout as one table of the report's appendix.

Edge layer.  The per-scenario step tables keep their own CSV files; on the page they are
stacked into one table with a first column naming the scenario, so the headings and the key
below them are printed once instead of once per scenario.
"""

from __future__ import annotations

from dataclasses import replace

from resonance.report.tables import Column, Table

__all__ = ["stack_tables"]

_LIM = "\nlim "
#: the first column (the scenario in words) wraps at this many characters [unitless]
LABEL_WRAP = 10


def _head(labels: list[str]) -> str:
    """One heading for a column whose heading differs between the parts: a limit that depends
    on the scenario, each part's in the order of the parts (``"TDD\\nPCC\\nlim 12"``,
    ``"...lim 15"``, ``"...lim 12"`` -> ``"...lim 12/15/12"``)."""
    parts = [s.rsplit(_LIM, 1) for s in labels]
    if all(len(p) == 2 for p in parts) and len({p[0] for p in parts}) == 1:
        return parts[0][0] + _LIM + "/".join(p[1] for p in parts)
    return labels[0]


def stack_tables(parts: list[tuple[str, Table]], name: str, title: str, label: str = "scenario") -> Table:
    """Stack tables with the same columns into one, a first column naming each part.

    Parameters
    ----------
    parts : list of (str, Table)
        The name of each part (e.g. the scenario in words) and its table, in order; every table
        has the same columns (a limit in a heading may differ).
    name : str
        File name the stacked table would have (it is drawn, not written) [unitless].
    title : str
        Title over the table [unitless].
    label : str, optional
        Heading of the first column [unitless].

    Returns
    -------
    Table
        The rows of every part in order, its name on the part's first row; the cells beyond their
        limit stay marked; a heading whose limit differs lists each part's limit in order.
    """
    first = parts[0][1]
    cols = tuple(c if len({t.columns[j].label for _, t in parts}) == 1
                 else replace(c, label=_head([t.columns[j].label for _, t in parts]))
                 for j, c in enumerate(first.columns))
    rows: list[tuple] = []
    bad: set = set()
    for lab, t in parts:
        if len(t.columns) != len(first.columns):
            raise ValueError(f"table {t.name} has {len(t.columns)} columns, {first.name} {len(first.columns)}")
        for i, r in enumerate(t.rows):
            bad |= {(len(rows), j + 1) for (ii, j) in t.bad if ii == i}
            rows.append((lab if i == 0 else "",) + tuple(r))
    varies = any(c.label != f.label for c, f in zip(cols, first.columns))
    note = ("Columns and codes as in the first step table of this bank"
            + ("; where a limit differs by scenario, its heading gives each scenario's limit in the order of "
               "the rows." if varies else "."))
    return Table(name, title, (Column(label, "", str, "left", LABEL_WRAP),) + cols, tuple(rows), note, frozenset(bad))
