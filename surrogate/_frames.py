"""Answers in the caller's form: a DataFrame in, a DataFrame out on the same index. pandas is
never imported here; the frame's own class builds the answer."""

from __future__ import annotations


def is_frame(obj) -> bool:
    """A pandas-like DataFrame (has columns, an index and to_dict)."""
    return hasattr(obj, "columns") and hasattr(obj, "index") and hasattr(obj, "to_dict")


def like_input(designs, out: dict):
    """``out`` (column -> array) as a DataFrame on ``designs``' index when ``designs`` is one."""
    if is_frame(designs):
        return type(designs)(out, index=designs.index)
    return out
