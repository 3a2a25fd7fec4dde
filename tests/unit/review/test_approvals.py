"""review.approvals: decisions bound to the image's content hash (sha256 of the file bytes)."""

import hashlib
import json

import pytest

from unit.review._batch import draw_shot, make_batch, rerender
from variantshot.errors import InputError
from variantshot.review import approvals


@pytest.fixture
def batch(tmp_path):
    out = tmp_path / "out"
    make_batch(out, failed=("LAMP-7-OAK--three-quarter",))
    return out


def test_approve_records_who_when_note_and_hash(batch):
    done = approvals.record_decision(batch, ["MUG-001-RED--front"], "approved", by="ana", note="ok")
    assert [d.shot_id for d in done] == ["MUG-001-RED--front"]
    stored = json.loads((batch / "approvals.json").read_text())["shots"]["MUG-001-RED--front"]
    # the hash is the sha256 of the image file as it is on disk (hashlib as the oracle)
    file_hash = hashlib.sha256((batch / "shots/MUG-001-RED--front.png").read_bytes()).hexdigest()
    assert stored["content_hash"] == file_hash
    assert stored["state"] == "approved" and stored["by"] == "ana" and stored["note"] == "ok"
    assert stored["at"].endswith("+00:00")
    states = approvals.approval_states(batch)
    assert states["MUG-001-RED--front"] == "approved"
    assert states["MUG-001-RED--three-quarter"] == "pending"


def test_changed_image_goes_back_to_pending_and_restoring_it_restores_the_decision(batch):
    approvals.record_decision(batch, ["MUG-001-RED--front"], "approved", by="ana")
    approvals.record_decision(batch, ["MUG-001-BLU--front"], "rejected", by="ana", note="dark")
    rerender(batch, "MUG-001-RED--front", draw_shot(120, "#B03A2F"))  # one code different
    rerender(batch, "MUG-001-BLU--front", draw_shot(120, "#2E5E8D"))
    states = approvals.approval_states(batch)
    assert states["MUG-001-RED--front"] == "pending"
    assert states["MUG-001-BLU--front"] == "pending"
    rerender(batch, "MUG-001-RED--front", draw_shot(120, "#B03A2E"))  # the approved image again
    assert approvals.approval_states(batch)["MUG-001-RED--front"] == "approved"


def test_globs_and_unknown_shots_with_close_matches(batch):
    shots = approvals.load_manifest(batch)
    assert approvals.resolve_shots(["MUG-001-RED*"], shots) == [
        "MUG-001-RED--front", "MUG-001-RED--three-quarter"]
    with pytest.raises(InputError) as err:
        approvals.resolve_shots(["MUG-001-RED--frnt"], shots)
    assert "MUG-001-RED--frnt" in str(err.value) and "MUG-001-RED--front" in str(err.value)


def test_failed_shot_cannot_be_approved(batch):
    with pytest.raises(InputError, match="LAMP-7-OAK--three-quarter"):
        approvals.record_decision(batch, ["LAMP-7-OAK--three-quarter"], "approved")


def test_approve_passing_takes_only_shots_whose_qa_all_passed(batch):
    manifest = json.loads((batch / "manifest.json").read_text())
    manifest["shots"]["MUG-001-BLU--front"]["qa"]["status"] = "warn"
    (batch / "manifest.json").write_text(json.dumps(manifest))
    done = approvals.approve_passing(batch, by="ana")
    ids = {d.shot_id for d in done}
    assert "MUG-001-BLU--front" not in ids and "LAMP-7-OAK--three-quarter" not in ids
    assert ids == {"MUG-001-RED--front", "MUG-001-RED--three-quarter", "MUG-001-BLU--three-quarter",
                   "LAMP-7-OAK--front"}


def test_missing_folder_and_bad_files_are_input_errors(tmp_path, batch):
    with pytest.raises(InputError, match="no such output folder"):
        approvals.load_manifest(tmp_path / "nope")
    with pytest.raises(InputError, match="manifest.json"):
        approvals.load_manifest(tmp_path)
    (batch / "approvals.json").write_text("{not json")
    with pytest.raises(InputError, match="approvals.json"):
        approvals.load_approvals(batch)


def test_no_temporary_files_left(batch):
    approvals.record_decision(batch, ["MUG-001-RED--front"], "approved", by="ana")
    assert not list(batch.glob(".vs-tmp-*"))


def _approve_one(args):
    out, sid = args
    approvals.record_decision(out, [sid], "approved", by=f"reviewer-{sid}")
    return sid


def test_concurrent_reviewers_do_not_lose_decisions(tmp_path):
    # 48 shots approved one by one from 4 processes at once; without the lock around
    # read-modify-write about two thirds of the decisions were lost when this was written
    import multiprocessing

    batch = tmp_path / "out"
    make_batch(batch, angles=[f"a{i}" for i in range(16)], size=40, qa=False)
    ids = list(approvals.load_manifest(batch))
    ctx = multiprocessing.get_context("spawn")
    with ctx.Pool(4) as pool:
        pool.map(_approve_one, [(str(batch), sid) for sid in ids])
    stored = approvals.load_approvals(batch)
    assert set(stored) == set(ids)
    assert all(stored[sid]["by"] == f"reviewer-{sid}" for sid in ids)
