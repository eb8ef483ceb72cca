"""``field=``: one value (or one table) of a JSON reply, for a spreadsheet cell or a CSV import.

A path names keys and list entries separated by dots: ``summary.meets``,
``order``, ``stages.2.components.R3.value``, ``yield.fraction``,
``metrics.attenuation_db.25600.0.p2.5``.

- **List entries count from 1** (``stages.2`` is stage 2, ``sections.1`` the
  first section): a spreadsheet counts rows from 1, the service numbers
  stages from 1, and ``stages.N`` is then the stage whose ``number`` is N.
  (Field paths in *problems* count from 0, ``stages[1]``: they locate an entry
  of the request body for a program, in brackets, as JSON arrays are indexed.)
- An entry of a list of objects may also be named by its ``ref`` (a part,
  ``components.R3``), ``family`` (``families.elliptic``) or ``name``.
- A key that itself contains dots (a frequency ``"25600.0"``, a percentile
  ``"p2.5"``) is matched as a whole: the longest key that fits wins.

:func:`select` resolves a path; :func:`check_top_level` refuses an unknown
first segment before any work is done. Both raise :class:`InvalidParameter`
(422, field ``field``) naming what exists at the point the path failed.
"""

from __future__ import annotations

from typing import Any, Iterable, Mapping, Sequence

from service.errors import InvalidParameter

#: Keys by which an entry of a list of objects may be named, in order of preference.
ENTRY_KEYS = ("ref", "family", "name")
#: At most this many names are listed in a message.
_LISTED = 40
MAX_PATH_LENGTH = 256


def _names(keys: Iterable[str]) -> str:
    keys = list(keys)
    more = f" ... ({len(keys)} in all)" if len(keys) > _LISTED else ""
    return ", ".join(keys[:_LISTED]) + more


def _segments(path: str) -> list[str]:
    if not path or len(path) > MAX_PATH_LENGTH or any(not s for s in path.split(".")):
        raise InvalidParameter(f"field must be a dotted path of at most {MAX_PATH_LENGTH} characters, such as "
                               "summary.meets or stages.1.components.R1.value", field="field")
    return path.split(".")


def check_top_level(path: str, fields: Sequence[str]) -> None:
    """Refuse (422) a path whose first key is none of ``fields`` (the reply's top-level fields).

    A first key containing dots is accepted when one of ``fields`` starts it.
    """
    segs = _segments(path)
    if any(".".join(segs[:k]) in fields for k in range(1, len(segs) + 1)):
        return
    raise InvalidParameter(f"unknown field {segs[0]!r}: the reply's top-level fields are {_names(fields)}",
                           field="field")


def _entry(items: list, seg: str, where: str) -> Any:
    if seg.isdigit():
        n = int(seg)
        if 1 <= n <= len(items):
            return items[n - 1]
        raise InvalidParameter(f"{where or 'the reply'} has {len(items)} entries, numbered from 1 to {len(items)}; "
                               f"no entry {n}", field="field")
    for key in ENTRY_KEYS:
        for item in items:
            if isinstance(item, Mapping) and item.get(key) == seg:
                return item
    key = next((k for k in ENTRY_KEYS if any(isinstance(item, Mapping) and k in item for item in items)), None)
    named = [str(item[key]) for item in items if isinstance(item, Mapping) and key in item] if key else []
    hint = f" or by {key}: {_names(named)}" if named else ""
    raise InvalidParameter(f"{where} is a list: name an entry by its number, 1 to {len(items)}{hint}; "
                           f"got {seg!r}", field="field")


def select(document: Any, path: str) -> Any:
    """The value at ``path`` in a JSON reply (see the module notes).

    Raises
    ------
    InvalidParameter
        A key or entry that does not exist (the message lists what does).
    """
    segs = _segments(path)
    node, where, i = document, "", 0
    while i < len(segs):
        if isinstance(node, Mapping):
            for k in range(len(segs), i, -1):
                key = ".".join(segs[i:k])
                if key in node:
                    node, where, i = node[key], f"{where}.{key}" if where else key, k
                    break
            else:
                what = f"no {segs[i]!r} under {where}" if where else f"unknown field {segs[i]!r}"
                kind = "its fields" if where else "the reply's top-level fields"
                raise InvalidParameter(f"{what}: {kind} are {_names(node)}", field="field")
        elif isinstance(node, list):
            node, where, i = _entry(node, segs[i], where), f"{where}.{segs[i]}", i + 1
        else:
            raise InvalidParameter(f"{where} is a single value; nothing lies under it ({'.'.join(segs[i:])!r})",
                                   field="field")
    return node


def scalar(value: Any, path: str) -> Any:
    """``value`` when it is one value (number, boolean, text or null); a 422 naming its entries otherwise."""
    if isinstance(value, Mapping):
        raise InvalidParameter(f"{path} is an object; name one of its fields: "
                               f"{_names(f'{path}.{k}' for k in value)}", field="field")
    if isinstance(value, list):
        raise InvalidParameter(f"{path} is a list of {len(value)}; name one entry, {path}.1 to {path}.{len(value)}, "
                               "or ask for format=csv", field="field")
    return value


def _flat(row: Mapping, prefix: str = "") -> dict[str, Any]:
    out: dict[str, Any] = {}
    for k, v in row.items():
        name = f"{prefix}{k}"
        if isinstance(v, Mapping):
            out.update(_flat(v, name + "."))
        elif isinstance(v, list) and v and isinstance(v[0], Mapping):
            out[name] = f"{len(v)} entries"
        else:
            out[name] = v
    return out


def table(value: Any, path: str) -> dict[str, list]:
    """A selected value as CSV columns: a list of objects is a row per entry (nested keys dotted), an
    object one row, a list of values one column, one value one cell."""
    name = path.rsplit(".", 1)[-1]
    if isinstance(value, list) and value and all(isinstance(v, Mapping) for v in value):
        rows = [_flat(v) for v in value]
    elif isinstance(value, Mapping):
        rows = [_flat(value)]
    elif isinstance(value, list):
        return {name: list(value)}
    else:
        return {name: [value]}
    columns: dict[str, list] = {}
    for row in rows:
        for key in row:
            columns.setdefault(key, [])
    for key in columns:
        columns[key] = [row.get(key) for row in rows]
    return columns
