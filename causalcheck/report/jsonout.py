"""JSON that pipelines can trust: no NaN or infinity ever reaches the document.

A non-finite float becomes ``null`` and a line in the document's ``notes`` list naming the key,
so a reader knows why the number is missing.
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

__all__ = ["clean_for_json", "dumps"]


def clean_for_json(value: Any, *, notes: list[str] | None = None, where: str = "") -> Any:
    """Return ``value`` with numpy types made plain and non-finite numbers replaced by None.

    >>> clean_for_json({"a": float("nan"), "b": [1, 2.5]}, notes=(n := []))
    {'a': None, 'b': [1, 2.5]}
    >>> n
    ['a: not a finite number (written as null)']
    """
    if isinstance(value, dict):
        return {str(k): clean_for_json(v, notes=notes, where=f"{where}.{k}" if where else str(k))
                for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [clean_for_json(v, notes=notes, where=f"{where}[{i}]") for i, v in enumerate(value)]
    if isinstance(value, np.ndarray):
        return clean_for_json(value.tolist(), notes=notes, where=where)
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        number = float(value)
        if not math.isfinite(number):
            if notes is not None:
                notes.append(f"{where}: not a finite number (written as null)")
            return None
        return number
    return value


def dumps(document: dict[str, Any]) -> str:
    """Serialise a result document; non-finite numbers become null and are noted in ``notes``."""
    notes: list[str] = []
    cleaned = clean_for_json(document, notes=notes)
    if notes:
        existing = cleaned.get("notes") or []
        cleaned["notes"] = list(existing) + notes
    return json.dumps(cleaned, indent=2, allow_nan=False, ensure_ascii=False) + "\n"
