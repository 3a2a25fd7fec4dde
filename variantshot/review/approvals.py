"""Review decisions bound to image content: ``<out>/approvals.json``.

``approvals.json`` maps a shot id to its last decision::

    {"format": 1, "shots": {SHOT_ID: {"state": "approved" | "rejected", "by": str, "at": ISO8601,
                                      "note": str, "content_hash": sha256 hex}}}

A decision holds only for the image it was made on: a shot's state is ``"pending"`` when it has
no decision, when the manifest's ``content_hash`` differs from the decision's (the shot was
re-rendered and its image changed), or when the shot failed to render.  Decisions are never
deleted, so a re-render that restores the old image restores the old decision.

The manifest (BRIEF section 7) is read here as plain JSON so that review works on any output
folder; this module never writes the manifest.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import difflib
import fnmatch
import getpass
import json
import os
from dataclasses import dataclass
from pathlib import Path

from .._atomic import atomic_write
from ..errors import InputError

__all__ = [
    "APPROVED",
    "REJECTED",
    "PENDING",
    "APPROVALS_FILE",
    "MANIFEST_FILE",
    "load_manifest",
    "load_approvals",
    "approval_state",
    "approval_states",
    "resolve_shots",
    "record_decision",
    "approve_passing",
    "passing_shots",
    "default_reviewer",
    "Decision",
]

APPROVED, REJECTED, PENDING = "approved", "rejected", "pending"
APPROVALS_FILE = "approvals.json"
MANIFEST_FILE = "manifest.json"


def load_manifest(out_dir) -> dict:
    """Read ``<out_dir>/manifest.json``; return its ``"shots"`` dict (id -> entry).

    Raises
    ------
    InputError
        If the folder or the manifest is missing or not a variantshot manifest.
    """
    out_dir = Path(out_dir)
    path = out_dir / MANIFEST_FILE
    if not out_dir.is_dir():
        raise InputError("no such output folder", file=out_dir,
                         accepted="a folder written by `variantshot render` or `demo`")
    if not path.is_file():
        raise InputError("no manifest.json here: nothing has been rendered into this folder",
                         file=out_dir, accepted="a folder written by `variantshot render` or `demo`")
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"cannot read the manifest: {exc}", file=path) from None
    shots = data.get("shots") if isinstance(data, dict) else None
    if not isinstance(shots, dict):
        raise InputError('not a variantshot manifest (no "shots" object)', file=path,
                         accepted='{"format": 1, "shots": {...}}')
    return shots


def load_approvals(out_dir) -> dict:
    """Read ``<out_dir>/approvals.json``; return ``{shot_id: decision dict}`` ({} if absent)."""
    path = Path(out_dir) / APPROVALS_FILE
    if not path.is_file():
        return {}
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"cannot read the approvals: {exc}", file=path,
                         accepted="the JSON written by `variantshot approve`") from None
    shots = data.get("shots") if isinstance(data, dict) else None
    if not isinstance(shots, dict):
        raise InputError('not an approvals file (no "shots" object)', file=path)
    return shots


def approval_state(entry: dict, decision: dict | None) -> str:
    """``"approved" | "rejected" | "pending"`` of one manifest entry given its stored decision.

    Parameters
    ----------
    entry : dict
        The shot's manifest entry (needs ``content_hash`` and ``status``).
    decision : dict or None
        Its entry in approvals.json.
    """
    if not decision or decision.get("state") not in (APPROVED, REJECTED):
        return PENDING
    if entry.get("status", "rendered") != "rendered":
        return PENDING
    current = entry.get("content_hash")
    if not current or decision.get("content_hash") != current:
        return PENDING
    return decision["state"]


def approval_states(out_dir, shots: dict | None = None) -> dict[str, str]:
    """State of every shot in the manifest: ``{shot_id: "approved" | "rejected" | "pending"}``."""
    shots = load_manifest(out_dir) if shots is None else shots
    decisions = load_approvals(out_dir)
    return {sid: approval_state(e, decisions.get(sid)) for sid, e in shots.items()}


def resolve_shots(patterns, shots: dict, *, file=None) -> list[str]:
    """Shot ids matching the given ids or globs (``fnmatch`` on ids), in manifest order.

    Raises
    ------
    InputError
        Naming every pattern that matched nothing, with the closest ids.
    """
    ids = list(shots)
    picked: list[str] = []
    problems: list[str] = []
    for pat in patterns:
        if pat in shots:
            hits = [pat]
        else:
            hits = [sid for sid in ids if fnmatch.fnmatchcase(sid, pat)]
        if not hits:
            close = difflib.get_close_matches(pat, ids, n=3, cutoff=0.5)
            hint = f"; did you mean {', '.join(close)}?" if close else ""
            problems.append(f"no shot {pat!r} in the manifest{hint}")
        for sid in hits:
            if sid not in picked:
                picked.append(sid)
    if problems:
        raise InputError(
            "; ".join(problems), file=file,
            accepted="shot ids from the manifest or globs on them, e.g. 'SKU*'",
        )
    order = {sid: i for i, sid in enumerate(ids)}
    return sorted(picked, key=order.__getitem__)


def default_reviewer() -> str:
    """The OS user name (``getpass.getuser()``), or ``"unknown"`` when it cannot be found."""
    try:
        return getpass.getuser()
    except Exception:  # no login name on some containers
        return os.environ.get("USER") or "unknown"


@dataclass(frozen=True)
class Decision:
    """What :func:`record_decision` did for one shot."""

    shot_id: str
    state: str
    previous: str
    qa_status: str | None


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()


def record_decision(out_dir, shot_ids, state: str, *, by: str | None = None, note: str = "",
                    at: str | None = None) -> list[Decision]:
    """Record ``state`` for each shot, bound to its current image, and write approvals.json.

    Parameters
    ----------
    out_dir : path
        The batch's output folder.
    shot_ids : list of str
        Shot ids or globs on ids (see :func:`resolve_shots`).
    state : {"approved", "rejected"}
    by : str, optional
        Reviewer name; the OS user by default.
    note : str
        Free text (a rejection should say why).
    at : str, optional
        ISO 8601 time; now (UTC) by default.

    Raises
    ------
    InputError
        Unknown shot, a shot that has no rendered image to bind to, or a bad state.
    """
    if state not in (APPROVED, REJECTED):
        raise InputError(f"unknown review state {state!r}", accepted="approved, rejected")
    out_dir = Path(out_dir)
    shots = load_manifest(out_dir)
    with _decisions_lock(out_dir):  # two reviewers at once must not lose each other's decisions
        return _record(out_dir, shots, shot_ids, state, by, note, at)


@contextlib.contextmanager
def _decisions_lock(out_dir: Path):
    """An exclusive advisory lock (``.approvals.lock``) around read-modify-write of approvals.json.

    A separate lock from the batch's output-folder lock, so a review can happen while a batch
    renders.  Where ``fcntl`` is missing (Windows) the atomic write alone protects the file.
    """
    try:
        import fcntl
    except ImportError:
        yield
        return
    with open(out_dir / ".approvals.lock", "a+b") as handle:
        fcntl.flock(handle.fileno(), fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(handle.fileno(), fcntl.LOCK_UN)


def _record(out_dir: Path, shots: dict, shot_ids, state, by, note, at) -> list[Decision]:
    decisions = load_approvals(out_dir)
    shot_ids = resolve_shots(shot_ids, shots, file=out_dir / MANIFEST_FILE)
    not_rendered = [sid for sid in shot_ids
                    if shots[sid].get("status", "rendered") != "rendered"
                    or not shots[sid].get("content_hash")]
    if not_rendered:
        raise InputError(
            f"cannot record a decision for shots without a rendered image: {', '.join(not_rendered)}",
            file=out_dir / MANIFEST_FILE, accepted="shots whose status is 'rendered'",
        )
    by = by or default_reviewer()
    at = at or _now()
    done = []
    for sid in shot_ids:
        entry = shots[sid]
        previous = approval_state(entry, decisions.get(sid))
        decisions[sid] = {
            "state": state,
            "by": by,
            "at": at,
            "note": note or "",
            "content_hash": entry["content_hash"],
        }
        done.append(Decision(sid, state, previous, (entry.get("qa") or {}).get("status")))
    payload = {"format": 1, "shots": dict(sorted(decisions.items()))}
    atomic_write(out_dir / APPROVALS_FILE, json.dumps(payload, indent=2, ensure_ascii=False) + "\n")
    return done


def passing_shots(shots: dict) -> list[str]:
    """Ids of rendered shots whose QA status is ``"pass"`` (every check passed)."""
    return [sid for sid, e in shots.items()
            if e.get("status", "rendered") == "rendered" and e.get("content_hash")
            and (e.get("qa") or {}).get("status") == "pass"]


def approve_passing(out_dir, *, by: str | None = None, note: str = "",
                    among: list[str] | None = None) -> list[Decision]:
    """Approve every shot (or every shot in ``among``) whose QA all passed."""
    shots = load_manifest(out_dir)
    ids = passing_shots(shots)
    if among is not None:
        keep = set(among)
        ids = [sid for sid in ids if sid in keep]
    if not ids:
        return []
    return record_decision(out_dir, ids, APPROVED, by=by, note=note)
