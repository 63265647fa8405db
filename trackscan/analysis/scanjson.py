"""scan.json: assemble the output contract and write it byte-identically.

Schema ``trackscan.scan/1`` (DESIGN.md section 3).  The text is canonical:
keys sorted, one-space indentation, floats in Python's shortest round-trip
form (``repr``), ``-0.0`` written as ``0.0``, non-finite numbers as
``null``, no timestamps.  The same input therefore gives the same bytes.
"""

from __future__ import annotations

import json
import math

from trackscan.io.atomic import write_text_atomic

__all__ = ["SCHEMA", "canonical", "dumps_scan", "write_scan"]

from trackscan.model import SCHEMA


def canonical(obj):
    """A copy of `obj` with JSON-safe, canonical numbers (tuples become lists)."""
    if isinstance(obj, dict):
        return {str(k): canonical(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [canonical(v) for v in obj]
    if isinstance(obj, bool) or obj is None or isinstance(obj, str):
        return obj
    if isinstance(obj, int):
        return int(obj)
    if hasattr(obj, "item") and not isinstance(obj, (list, dict)):
        return canonical(obj.item()) if getattr(obj, "ndim", 0) == 0 else canonical(obj.tolist())
    if isinstance(obj, float):
        if not math.isfinite(obj):
            return None
        return obj + 0.0
    raise TypeError(f"cannot write {type(obj).__name__} to scan.json")


def dumps_scan(scan) -> str:
    """The canonical text of a scan result (a ScanResult or its dict; ends with a newline)."""
    if hasattr(scan, "to_dict"):
        scan = scan.to_dict()
    return json.dumps(canonical(scan), sort_keys=True, indent=1, ensure_ascii=False,
                      allow_nan=False) + "\n"


def write_scan(path, scan) -> None:
    """Write scan.json atomically (temp file + rename)."""
    write_text_atomic(path, dumps_scan(scan))
