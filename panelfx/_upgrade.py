"""Saved derivations of format version 1, read as version 2 with the same output columns.

Version 2 changed default output names (formula-safe, one column-first pattern) and renamed
one option.  A version-1 file is a reviewed artefact of a validated pipeline: re-running it
must give the columns it gave when it was saved.  So each version-1 transform whose default
name changed gets its old default as an explicit ``name``, and the renamed option is read
under its new name.  The file itself is never rewritten; ``save`` writes version 2.
"""

from __future__ import annotations

from typing import Any

#: (transform type, old option) -> new option.
RENAMED_OPTIONS = {("within_between", "level"): "between"}


def _old_label(value: Any) -> str:
    """How version 1 put a span into a name: '30D' as written, numbers as '%g' (2.5 -> '2.5')."""
    return value.replace(" ", "") if isinstance(value, str) else f"{value:g}"


def _old_name(kind: str, opt: dict[str, Any]) -> str | None:
    """The version-1 default name of a transform whose default changed, else None."""
    col = opt.get("col")
    if not isinstance(col, str):
        return None  # malformed: the normal checks report it
    if kind == "change_from_baseline" and opt.get("kind") == "percent":
        return f"{col}_pct_change"
    if kind == "change_from_previous" and opt.get("kind") == "percent":
        return f"{col}_pct_diff"
    if kind == "events_so_far":
        return f"{col}_count"
    if kind == "time_since":
        return f"time_since_first_{col}" if opt.get("which") == "first" else f"time_since_{col}"
    if kind == "carry_forward":
        return f"{col}_filled"
    return None


def upgrade_v1(transforms: Any) -> Any:
    """The ``transforms`` list of a version-1 file, as version 2 reads it (a new list; entries
    that are not as expected are left for the normal checks to report)."""
    if not isinstance(transforms, list):
        return transforms
    out = []
    for entry in transforms:
        if not (isinstance(entry, dict) and isinstance(entry.get("type"), str)
                and isinstance(entry.get("options"), dict)):
            out.append(entry)
            continue
        kind, opt = entry["type"], dict(entry["options"])
        for (k, old), new in RENAMED_OPTIONS.items():
            if k == kind and old in opt and new not in opt:
                opt[new] = opt.pop(old)
        if opt.get("name") is None:
            name = _old_name(kind, opt)
            if name is None and kind in ("rolling", "lag"):
                name = _old_span_name(kind, opt)
            if name is not None:
                opt["name"] = name
        out.append({**entry, "options": opt})
    return out


def _old_span_name(kind: str, opt: dict[str, Any]) -> str | None:
    """Version 1 wrote spans in names as given (``sbp_mean_90D``, ``sbp_lag_2.5``)."""
    from ._transform import REGISTRY
    from .transforms._spans import span_label

    span = opt.get("span" if kind == "rolling" else "offset")
    if span is None or isinstance(span, bool) or not isinstance(span, (str, int, float)):
        return None
    try:
        (new,) = REGISTRY[kind](**opt).outputs()
    except Exception:  # noqa: BLE001 - a bad entry is reported by the normal checks
        return None
    old = new.replace(f"_{span_label(span)}", f"_{_old_label(span)}", 1)
    return old if old != new else None
