"""The HTML contact sheet in a real browser: headless Chromium (Debian's ``chromium``, installed by .ci/run).

Chromium is the outside oracle: its parsed DOM must hold one <img> per rendered shot, the catalog
value containing ``<script>`` must arrive as text (escaped), and the screenshot must not be blank.
"""

import html
import os
import re
import shutil
import subprocess

import numpy as np
import pytest
from PIL import Image

from unit.review._batch import DEFAULT_VARIANTS, make_batch
from variantshot.review import approvals
from variantshot.review.sheets import build_sheets

SCRIPT = "<script>document.title='pwned'</script>"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-dev-shm-usage", "--allow-file-access-from-files"]


@pytest.fixture(scope="module")
def chromium():
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    if exe is None:
        pytest.skip("chromium is not on PATH (.ci/run installs Debian's chromium)")
    return exe


def _run(exe, profile, *args, timeout=90):
    env = dict(os.environ, HOME=str(profile))
    return subprocess.run([exe, *FLAGS, f"--user-data-dir={profile}", *args], capture_output=True,
                          text=True, timeout=timeout, env=env)


@pytest.fixture(scope="module")
def sheet(tmp_path_factory):
    out = tmp_path_factory.mktemp("browser") / "out"
    variants = DEFAULT_VARIANTS + [("CUP-9", "cup", f"Ink {SCRIPT}", "matte", "#223344")]
    shots = make_batch(out, variants=variants, size=200, failed=("LAMP-7-OAK--three-quarter",))
    approvals.record_decision(out, ["MUG*"], "approved", by="test")
    build_sheets(out, formats=("html",))
    n_images = sum(1 for e in shots.values() if e["status"] == "rendered")
    return out / "sheets" / "contact-sheet.html", n_images


def test_dom_has_one_image_per_shot_and_escaped_catalog_text(chromium, sheet, tmp_path):
    page, n_images = sheet
    res = _run(chromium, tmp_path / "profile", "--dump-dom", page.as_uri())
    assert res.returncode == 0, res.stderr[-2000:]
    dom = res.stdout
    assert len(re.findall(r"<img\b", dom)) == n_images
    # the browser built no element from the catalog value: it is text, so the serialised DOM
    # shows it escaped, and our script did not run the injected one (the title is unchanged)
    assert html.escape(SCRIPT, quote=False) in dom
    assert SCRIPT not in dom
    assert "pwned" not in re.search(r"<title>(.*?)</title>", dom, re.S).group(1)
    assert len(re.findall(r"<script\b", dom)) == 1
    # the filter script ran: it wrote the count of shown shots
    assert f"{n_images + 1} of {n_images + 1} shots shown" in dom


def test_screenshot_is_not_blank(chromium, sheet, tmp_path):
    page, _ = sheet
    png = tmp_path / "shot.png"
    res = _run(chromium, tmp_path / "profile", f"--screenshot={png}", "--window-size=1200,900",
               "--hide-scrollbars", page.as_uri())
    assert png.is_file(), res.stderr[-2000:]
    with Image.open(png) as im:
        arr = np.asarray(im.convert("RGB"), dtype=np.float64)
    assert arr.shape[:2] == (900, 1200)
    assert arr.std() > 10.0  # a blank page has (almost) no variance
    # the thumbnails were loaded: the red of the first variant's shot is on screen
    red = (np.abs(arr - (0xB0, 0x3A, 0x2E)).max(axis=2) < 12).sum()
    assert red > 500
    keep = os.environ.get("VARIANTSHOT_KEEP_SCREENSHOT")
    if keep:
        shutil.copy(png, keep)


def test_filters_from_the_address_hide_other_shots(chromium, sheet, tmp_path):
    page, n_images = sheet
    url = page.as_uri() + "?approval=approved&product=mug"
    res = _run(chromium, tmp_path / "profile", "--dump-dom", url)
    assert res.returncode == 0, res.stderr[-2000:]
    dom = res.stdout
    figures = re.findall(r'<figure class="cell( hidden)?"[^>]*data-approval="(\w+)"', dom)
    shown = [state for hidden, state in figures if not hidden]
    # the four MUG shots were approved in the fixture; everything else is hidden by the script
    assert shown == ["approved"] * 4
    assert len(figures) == n_images + 1  # the failed render has a figure too, without an <img>
    assert f"4 of {n_images + 1} shots shown" in dom
