"""Cell values as read from any source: ids as text, numbers, columns found by name."""

from __future__ import annotations

import unicodedata
from collections.abc import Iterable

import numpy as np
import pandas as pd

from .report import ids_text

__all__ = ["text_values", "number_values", "cell_text", "find_column", "columns_text"]


def text_values(values) -> tuple[np.ndarray, np.ndarray]:
    """Ids as text, and where they are missing.

    Whole numbers stored as floats (Shapefile, spreadsheets) lose their ``.0``; strings are
    stripped and put in Unicode normal form NFC (an accent stored as a separate combining
    mark reads as the one composed character it looks like, so ids match whichever way a
    file or keyboard spelled them); None, NaN and "" count as missing.
    """
    s = pd.Series(values, dtype=object).reset_index(drop=True)
    missing = s.isna().to_numpy(dtype=bool)
    num = pd.to_numeric(s.where(~missing), errors="coerce")
    is_num = s.map(lambda v: isinstance(v, int | float | np.number)
                   and not isinstance(v, bool)).to_numpy(dtype=bool)
    whole = is_num & np.isfinite(num.to_numpy(dtype=float)) & (num.to_numpy() % 1 == 0)
    out = np.array([unicodedata.normalize("NFC", str(v).strip()) for v in s], dtype=object)
    out[whole] = num[whole].astype(np.int64).astype(str).to_numpy()
    missing = missing | (out == "")
    out[missing] = ""
    return out, missing


def number_values(values) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Numbers (float), where missing, where not a number (text that does not parse, inf)."""
    s = pd.Series(values, dtype=object).reset_index(drop=True)
    text = s.map(lambda v: v.strip() if isinstance(v, str) else v)
    missing = (text.isna() | text.eq("")).to_numpy(dtype=bool)
    num = pd.to_numeric(text.where(~missing), errors="coerce").to_numpy(dtype=float)
    bad = ~missing & ~np.isfinite(num)
    return np.where(missing | bad, np.nan, num), missing, bad


def cell_text(values, mask: np.ndarray) -> str:
    """The first few offending cell values, quoted."""
    vals = pd.Series(values, dtype=object).reset_index(drop=True)[mask]
    shown = [f"{v:g}" if isinstance(v, int | float) and not isinstance(v, bool) else repr(str(v))
             for v in vals]
    return ids_text(list(dict.fromkeys(shown)), limit=4)


def find_column(columns: Iterable[str], name: str) -> str | None:
    """``name`` among ``columns``: exact, else the one column equal to it ignoring case."""
    cols = [str(c) for c in columns]
    if name in cols:
        return name
    folded = [c for c in cols if c.casefold() == name.casefold()]
    return folded[0] if len(folded) == 1 else None


def columns_text(columns: Iterable[str]) -> str:
    cols = [str(c) for c in columns if str(c) != "geometry"]
    return ", ".join(cols) if cols else "none"
