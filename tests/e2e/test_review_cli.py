"""The review commands through the CLI (DESIGN.md contract): qa, approve, reject, sheet."""

import json

import pytest
from typer.testing import CliRunner

from unit.review._batch import draw_shot, make_batch, rerender
from variantshot.cli.main import app


def run(*args):
    return CliRunner().invoke(app, [str(a) for a in args])


@pytest.fixture
def batch(tmp_path):
    out = tmp_path / "out"
    make_batch(out)
    return out


def decisions(out):
    return json.loads((out / "approvals.json").read_text())["shots"]


def test_approve_and_reject_record_decisions(batch):
    r = run("approve", batch, "MUG-001-RED*", "--by", "ana", "--note", "matches the sample")
    assert r.exit_code == 0, r.output
    assert "approved: MUG-001-RED--front" in r.output
    d = decisions(batch)
    assert set(d) == {"MUG-001-RED--front", "MUG-001-RED--three-quarter"}
    assert d["MUG-001-RED--front"]["by"] == "ana"
    assert d["MUG-001-RED--front"]["note"] == "matches the sample"
    r = run("reject", batch, "MUG-001-RED--front", "--note", "handle clipped", "--by", "bo")
    assert r.exit_code == 0, r.output
    assert "(was approved)" in r.output
    assert decisions(batch)["MUG-001-RED--front"]["state"] == "rejected"


def test_unknown_shot_exits_2_naming_it_and_close_matches(batch):
    r = run("approve", batch, "MUG-001-RED--frnt")
    assert r.exit_code == 2
    assert "MUG-001-RED--frnt" in r.output and "MUG-001-RED--front" in r.output
    assert not (batch / "approvals.json").exists()


def test_reject_needs_a_note_and_approve_needs_shots(batch):
    assert run("reject", batch, "MUG-001-RED--front").exit_code == 2
    assert run("reject", batch, "MUG-001-RED--front", "--note", " ").exit_code == 2
    assert run("approve", batch).exit_code == 2
    assert run("approve", batch.parent / "missing", "x").exit_code == 2


def test_approve_passing(batch):
    manifest = json.loads((batch / "manifest.json").read_text())
    manifest["shots"]["LAMP-7-OAK--front"]["qa"]["status"] = "fail"
    (batch / "manifest.json").write_text(json.dumps(manifest))
    r = run("approve", batch, "--passing", "--by", "ana")
    assert r.exit_code == 0, r.output
    assert set(decisions(batch)) == set(manifest["shots"]) - {"LAMP-7-OAK--front"}


def test_approval_goes_pending_when_the_image_changes(batch):
    assert run("approve", batch, "MUG-001-BLU--front").exit_code == 0
    rerender(batch, "MUG-001-BLU--front", draw_shot(120, "#2E5E8C"))  # same pixels, same bytes
    out = json.loads(run("qa", batch, "--json").stdout)
    assert out["shots"]["MUG-001-BLU--front"]["approval"] == "approved"
    rerender(batch, "MUG-001-BLU--front", draw_shot(120, "#3E5E8C"))  # changed colour
    out = json.loads(run("qa", batch, "--json").stdout)
    assert out["shots"]["MUG-001-BLU--front"]["approval"] == "pending"


def test_qa_json_and_exit_status(batch):
    r = run("qa", batch, "--json")
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    assert "physical samples" in data["caution"]
    assert all(s["qa"]["status"] == "pass" for s in data["shots"].values())
    manifest = json.loads((batch / "manifest.json").read_text())
    manifest["shots"]["LAMP-7-OAK--front"]["qa"]["status"] = "fail"
    (batch / "manifest.json").write_text(json.dumps(manifest))
    assert run("qa", batch).exit_code == 1


def test_qa_checks_images_the_batch_left_without_qa(tmp_path):
    out = tmp_path / "out"
    make_batch(out, qa=False)
    r = run("qa", out, "--json")
    data = json.loads(r.stdout)
    shot = data["shots"]["MUG-001-RED--front"]
    assert shot["qa_source"] == "image file"
    assert {c["name"] for c in shot["qa"]["checks"]} >= {"fill", "centring", "background_purity"}


def test_sheet_command_writes_files(batch):
    run("approve", batch, "MUG*")
    r = run("sheet", batch, "--format", "png,html")
    assert r.exit_code == 0, r.output
    assert (batch / "sheets/contact-sheet.png").is_file()
    assert (batch / "sheets/contact-sheet.html").is_file()
    assert not (batch / "sheets/contact-sheet.pdf").exists()
    r = run("sheet", batch, "--approved-only", "--format", "pdf")
    assert r.exit_code == 0, r.output
    assert (batch / "sheets/approved-sheet.pdf").is_file()
    assert len(json.loads((batch / "sheets/approved.json").read_text())["files"]) == 4
    assert run("sheet", batch, "--format", "gif").exit_code == 2


MUG_HEADER = "sku,product,colourway,colour,finish,angles\n"


def _tiny_render(catalog, out, repo_dir, **kw):
    runner = pytest.importorskip("variantshot.batch.runner")
    from variantshot.batch.quality import Quality

    tiny = Quality("tiny", 24, 4, 0.5, max_depth=3)  # 24 px at 4 spp: enough to hash
    return runner.render_batch(catalog, out, quality=tiny, templates_dir=repo_dir / "templates",
                               sheet_formats=(), **kw)


def test_real_rerender_keeps_or_drops_the_approval(tmp_path, repo_dir):
    # The batch renders deterministically (same seed, same bytes), so an unchanged re-render must
    # keep the approval, and a changed catalog row must send the shot back to pending.
    if not (repo_dir / "templates" / "mug.gltf.j2").is_file():
        pytest.skip("the demo templates are not in this checkout")
    catalog = tmp_path / "catalog.csv"
    out = tmp_path / "out"
    catalog.write_text(MUG_HEADER + "T-MUG-1,mug,Clay,#b5654a,satin,front\n", encoding="utf-8")
    _tiny_render(catalog, out, repo_dir)
    sid = "T-MUG-1--front"
    assert run("approve", out, sid, "--by", "ana").exit_code == 0
    before = json.loads((out / "manifest.json").read_text())["shots"][sid]["content_hash"]

    _tiny_render(catalog, out, repo_dir, force=True)  # rendered again, same row
    after = json.loads((out / "manifest.json").read_text())["shots"][sid]
    assert after["content_hash"] == before
    assert json.loads(run("qa", out, "--json").stdout)["shots"][sid]["approval"] == "approved"

    catalog.write_text(MUG_HEADER + "T-MUG-1,mug,Clay,#3a65b5,satin,front\n", encoding="utf-8")
    _tiny_render(catalog, out, repo_dir)
    changed = json.loads((out / "manifest.json").read_text())["shots"][sid]
    assert changed["content_hash"] != before
    assert json.loads(run("qa", out, "--json").stdout)["shots"][sid]["approval"] == "pending"
