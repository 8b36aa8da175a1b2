"""Naming what changed in a record: part digests (the seal) and a structural diff.

Lists of objects that carry an ``id`` (stages, steps, instruments), a ``number`` (attempts)
or a ``seq`` (events) are keyed by it, so a finding names "stage gate / step vgs_overdrive / attempt 2 / metrics.vgs"
rather than a list index, and a reordering is told apart from an edit.

The seal written into an exported record holds a SHA-256 of the canonical content, a short
digest of every object and list inside it, and the order of every keyed list. It is not the
proof (the signatures are): it only lets ``verify`` say where a file was edited when no log
is at hand.
"""

from __future__ import annotations

import hashlib
from collections.abc import Iterator
from typing import Any

from bringup.record.rfc8785 import canonical_bytes, canonical_text

__all__ = ["seal_of", "diagnose_seal", "diff_content", "label_of", "content_digest"]

Path = tuple[str, ...]
_SEP = "/"
_DIGEST_CHARS = 16  # 64 bits: enough to tell parts apart, not a security claim


def content_digest(content: Any) -> str:
    """SHA-256 (hex) of the canonical JSON of ``content``."""
    return hashlib.sha256(canonical_bytes(content)).hexdigest()


def _key_of(item: Any) -> str | None:
    if isinstance(item, dict):
        if isinstance(item.get("id"), str):
            return item["id"]
        for key in ("number", "seq"):  # attempts by number; events by their place in the chain
            value = item.get(key)
            if isinstance(value, int) and not isinstance(value, bool):
                return str(value)
    return None


def _keys(items: list) -> list[str] | None:
    """The keys of a keyed list, or None when the list is not keyed (or keys repeat)."""
    if not items:
        return []
    keys = [_key_of(item) for item in items]
    if any(k is None for k in keys) or len(set(keys)) != len(keys):
        return None
    return keys  # type: ignore[return-value]


def _children(node: Any) -> Iterator[tuple[str, Any]]:
    if isinstance(node, dict):
        yield from node.items()
    elif isinstance(node, list):
        keys = _keys(node)
        if keys is None:
            yield from ((f"[{i}]", item) for i, item in enumerate(node))
        else:
            yield from zip(keys, node, strict=True)


def _walk(node: Any, path: Path = ()) -> Iterator[tuple[Path, Any]]:
    """Every object and list in ``node`` with its keyed path (scalars are left to parents)."""
    if isinstance(node, dict | list):
        yield path, node
        for name, child in _children(node):
            yield from _walk(child, (*path, name))


def _short(node: Any) -> str:
    return hashlib.sha256(canonical_bytes(node)).hexdigest()[:_DIGEST_CHARS]


def _text(path: Path) -> str:
    return _SEP.join(p.replace("%", "%25").replace(_SEP, "%2F") for p in path)


def _untext(text: str) -> Path:
    if not text:
        return ()
    return tuple(p.replace("%2F", _SEP).replace("%25", "%") for p in text.split(_SEP))


def _sealed_text(node: Any, path: Path, parts: dict[str, str], order: dict[str, list[str]]) -> str:
    """The canonical text of ``node``, built from its children's texts (each computed once),
    recording the digest of every object and list and the order of every keyed list."""
    if isinstance(node, dict):
        names = sorted(node, key=lambda k: k.encode("utf-16-be"))
        inner = ",".join(
            canonical_text(k) + ":" + _sealed_text(node[k], (*path, k), parts, order) for k in names
        )
        text = "{" + inner + "}"
    elif isinstance(node, list):
        keys = _keys(node)
        names = keys if keys is not None else [f"[{i}]" for i in range(len(node))]
        if keys is not None:
            order[_text(path)] = keys
        text = (
            "["
            + ",".join(
                _sealed_text(item, (*path, name), parts, order)
                for name, item in zip(names, node, strict=True)
            )
            + "]"
        )
    else:
        return canonical_text(node)
    if path:
        parts[_text(path)] = hashlib.sha256(text.encode("utf-8")).hexdigest()[:_DIGEST_CHARS]
    return text


def seal_of(content: dict) -> dict:
    """The seal of ``content``: its digest, part digests and keyed-list orders."""
    parts: dict[str, str] = {}
    order: dict[str, list[str]] = {}
    text = _sealed_text(content, (), parts, order)
    return {
        "algorithm": "SHA-256",
        "content_sha256": hashlib.sha256(text.encode("utf-8")).hexdigest(),
        "parts": parts,
        "order": order,
    }


_SINGULAR = {
    "stages": "stage",
    "steps": "step",
    "attempts": "attempt",
    "instruments": "instrument",
    "channels": "channel",
    "waveforms": "waveform",
    "events": "event",
    "signatures": "signature",
}


def label_of(path: Path) -> str:
    """A readable name for ``path``: 'stage gate / step vgs / attempt 2 / metrics.vgs'."""
    out: list[str] = []
    dotted: list[str] = []
    i = 0
    while i < len(path):
        name = path[i]
        nxt = path[i + 1] if i + 1 < len(path) else None
        if name in _SINGULAR and nxt is not None and not nxt.startswith("["):
            if dotted:
                out.append(".".join(dotted))
                dotted = []
            out.append(f"{_SINGULAR[name]} {nxt}")
            i += 2
            continue
        if name.startswith("[") and dotted:
            dotted[-1] += name
        else:
            dotted.append(name)
        i += 1
    if dotted:
        out.append(".".join(dotted))
    return " / ".join(out) or "the record"


def _drop_descendants(paths: list[Path]) -> list[Path]:
    """Keep the shallowest of nested paths (an added or removed part, not all its insides)."""
    keep: list[Path] = []
    for p in sorted(paths, key=len):
        if not any(p[: len(k)] == k for k in keep):
            keep.append(p)
    return sorted(keep)


def _drop_ancestors(paths: list[Path]) -> list[Path]:
    """Keep the deepest of nested paths (the part that was edited, not its containers)."""
    return sorted(p for p in paths if not any(len(q) > len(p) and q[: len(p)] == p for q in paths))


def diagnose_seal(content: dict, seal: Any) -> list[str]:
    """Findings (one line each) where ``content`` no longer matches the ``seal`` written with it."""
    if not isinstance(seal, dict) or not isinstance(seal.get("parts"), dict):
        return ["seal: missing or malformed, cannot say where the content changed"]
    now = seal_of(content)
    if now["content_sha256"] == seal.get("content_sha256"):
        return []
    findings: list[str] = []
    old_order = seal.get("order") if isinstance(seal.get("order"), dict) else {}
    for text in sorted(set(old_order) & set(now["order"])):
        before, after = old_order[text], now["order"][text]
        if not (isinstance(before, list) and all(isinstance(k, str) for k in before)):
            continue  # an edited seal: the part digests below still name what changed
        if before != after and sorted(before) == sorted(after):
            findings.append(
                f"{label_of(_untext(text))}: reordered to {', '.join(after)} "
                f"(sealed order {', '.join(before)})"
            )
    old_parts: dict[str, str] = seal["parts"]
    new_parts: dict[str, str] = now["parts"]
    removed = _drop_descendants([_untext(t) for t in set(old_parts) - set(new_parts)])
    added = _drop_descendants([_untext(t) for t in set(new_parts) - set(old_parts)])
    findings += [f"{label_of(p)}: removed since sealing" for p in removed]
    findings += [f"{label_of(p)}: added since sealing" for p in added]
    changed = [_untext(t) for t in set(old_parts) & set(new_parts) if old_parts[t] != new_parts[t]]
    # A reordered list changes its own digest and its parents' but no child's: named above.
    reordered = {_untext(t) for t in old_order if old_order.get(t) != now["order"].get(t)}
    moved_only = [
        p
        for p in changed
        if p in reordered and not any(len(q) > len(p) and q[: len(p)] == p for q in changed)
    ]
    changed = [p for p in changed if p not in moved_only]
    touched = set(removed) | set(added) | set(moved_only)
    for p in _drop_ancestors(changed):
        if any(t[: len(p)] == p and len(t) > len(p) for t in touched):
            continue  # only a container of a part already named as added/removed/moved
        node = _lookup(content, p)
        findings.append(f"{label_of(p)}: changed since sealing (now {_preview(node)})")
    if not findings:
        findings.append("content: changed since sealing (a value directly in the top level)")
    return findings


def _lookup(node: Any, path: Path) -> Any:
    for name in path:
        found = None
        for child_name, child in _children(node):
            if child_name == name:
                found = child
                break
        node = found
    return node


def _preview(node: Any, limit: int = 120) -> str:
    text = canonical_text(node)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _diff(a: Any, b: Any, path: Path, out: list[tuple[Path, str]], names: tuple[str, str]) -> None:
    if isinstance(a, dict) and isinstance(b, dict):
        for key in sorted(set(a) | set(b)):
            if key not in b:
                out.append(((*path, key), f"in the {names[0]} only ({_preview(a[key], 60)})"))
            elif key not in a:
                out.append(((*path, key), f"in the {names[1]} only ({_preview(b[key], 60)})"))
            else:
                _diff(a[key], b[key], (*path, key), out, names)
        return
    if isinstance(a, list) and isinstance(b, list):
        ka, kb = _keys(a), _keys(b)
        if ka is not None and kb is not None:
            ma, mb = dict(zip(ka, a, strict=True)), dict(zip(kb, b, strict=True))
            common_a = [k for k in ka if k in mb]
            common_b = [k for k in kb if k in ma]
            if common_a != common_b:
                out.append(
                    (
                        path,
                        f"order {', '.join(ka)} in the {names[0]}, "
                        f"{', '.join(kb)} in the {names[1]}",
                    )
                )
            for k in ka:
                if k not in mb:
                    out.append(((*path, k), f"in the {names[0]} only, missing from the {names[1]}"))
            for k in kb:
                if k not in ma:
                    out.append(((*path, k), f"in the {names[1]} only, missing from the {names[0]}"))
            for k in common_a:
                _diff(ma[k], mb[k], (*path, k), out, names)
            return
        if len(a) == len(b):
            for i, (x, y) in enumerate(zip(a, b, strict=True)):
                _diff(x, y, (*path, f"[{i}]"), out, names)
            return
    if canonical_text(a) != canonical_text(b):
        out.append(
            (path, f"{_preview(a, 60)} in the {names[0]}, {_preview(b, 60)} in the {names[1]}")
        )


def diff_content(a: Any, b: Any, names: tuple[str, str] = ("record", "log")) -> list[str]:
    """Every difference between ``a`` and ``b``, one line each, deepest part named."""
    out: list[tuple[Path, str]] = []
    _diff(a, b, (), out, names)
    return [f"{label_of(p)}: {what}" for p, what in out]
