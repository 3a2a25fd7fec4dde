"""review.qa: verdicts, the manifest "qa" shape (BRIEF §7) and the swatch ΔE2000 against colour-science."""

import types
import warnings

import numpy as np
import pytest

from variantshot.review import qa


def packshot(size=200, side=170, dx=0, shadow=True, colour=(150, 60, 40)):
    img = np.full((size, size, 3), 255, np.uint8)
    cov = np.zeros((size, size))
    x0 = (size - side) // 2 + dx
    y0 = (size - side) // 2
    if shadow:  # a grey contact shadow right under the product, inside the shadow zone
        img[y0 + side : y0 + side + 4, max(0, x0 + 10) : x0 + side - 10] = 210
    img[y0 : y0 + side, max(0, x0) : x0 + side] = colour
    cov[y0 : y0 + side, max(0, x0) : x0 + side] = 1.0
    return img, cov


def statuses(result):
    return {c.name: c.status for c in result.checks}


def test_good_packshot_passes_every_check_and_has_manifest_shape():
    img, cov = packshot()
    res = qa.run_qa(img, coverage=cov)
    assert res.status == "pass", res.to_dict()
    d = res.to_dict()
    assert d["status"] == "pass"
    for c in d["checks"]:  # BRIEF §7: {"name", "status", "value", "limit", "message"}
        assert set(c) == {"name", "status", "value", "limit", "message"}
        assert c["status"] in ("pass", "warn", "fail")
    assert [c["name"] for c in d["checks"]] == [
        "fill", "centring", "edge_clipping", "background_purity", "clipped_highlights"]
    assert d["checks"][0]["value"] == pytest.approx(170 / 200)
    assert d["product_colour"]["hex"] == "#963C28"
    assert "physical samples" in qa.CAUTION


def test_small_off_centre_clipped_product_fails_the_right_checks():
    img, cov = packshot(side=120, dx=60)  # fill 0.6, centre shifted 0.3, touches the right edge
    res = qa.run_qa(img, coverage=cov)
    st = statuses(res)
    assert st["fill"] == "fail" and st["centring"] == "fail" and st["edge_clipping"] == "fail"
    assert res.status == "fail"
    assert res.check("fill").value == pytest.approx(0.6)


def test_fill_bands_follow_settings():
    img, cov = packshot(side=156)  # 0.78: between warn (0.75) and pass (0.80)
    assert statuses(qa.run_qa(img, coverage=cov))["fill"] == "warn"
    loose = qa.QASettings(fill_target=0.78)
    assert statuses(qa.run_qa(img, coverage=cov, settings=loose))["fill"] == "pass"


def test_background_purity_judges_only_white_mode_and_outside_the_shadow():
    img, cov = packshot()
    img[:20, :] = 250  # a grey band at the top, far from the product: 10 % of the frame
    res = qa.run_qa(img, coverage=cov)
    assert statuses(res)["background_purity"] == "fail"
    assert res.check("background_purity").value < 0.95
    assert "background_purity" not in statuses(qa.run_qa(img, coverage=cov, background="transparent"))


def test_alpha_channel_gives_the_coverage():
    img, cov = packshot(shadow=False)
    rgba = np.dstack([img, (cov * 255).astype(np.uint8)])
    assert qa.run_qa(rgba, background="transparent").check("fill").value == pytest.approx(0.85)


def test_noise_check_uses_film_variance_against_target():
    img, cov = packshot()
    radiance = np.full((200, 200, 3), 0.5)
    film = types.SimpleNamespace(radiance=radiance, variance=np.full((200, 200, 3), (0.5 * 0.03) ** 2),
                                 alpha=cov)
    # luminance variance = sum(w^2) * var; rse = sqrt(sum w^2) * 0.03 = 0.0225 (w: sRGB Y row)
    w2 = 0.2126**2 + 0.7152**2 + 0.0722**2
    res = qa.run_qa(img, film=film, noise_target=0.05)
    assert res.check("noise").value == pytest.approx(np.sqrt(w2) * 0.03, rel=1e-3)
    assert res.check("noise").status == "pass"
    assert qa.run_qa(img, film=film, noise_target=0.015).check("noise").status == "warn"
    assert qa.run_qa(img, film=film, noise_target=0.005).check("noise").status == "fail"


def test_swatch_delta_e_agrees_with_colour_science():
    colour = pytest.importorskip("colour")
    # the catalog colour and a swatch a few codes off; the oracle converts the 8-bit sRGB itself
    # (IEC 61966-2-1 decode, sRGB matrix, CIE 1976 Lab with D65) and runs its own CIEDE2000.
    # colour-science uses the standard's 4-decimal matrix, we derive ours from the primaries
    # (REFERENCES §1: they differ by ~1e-4), which moves ΔE2000 by a few thousandths: tol 0.01.
    lab_ref = np.array([52.0, 38.0, 24.0])
    swatch = np.array([172.0, 98.0, 80.0])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        xyz = colour.sRGB_to_XYZ(swatch / 255.0)
        lab_oracle = colour.XYZ_to_Lab(xyz, colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["D65"])
        expected = float(colour.delta_E(lab_oracle, lab_ref, method="CIE 2000"))
    assert qa.swatch_delta_e(swatch, lab_ref) == pytest.approx(expected, abs=0.01)
    # an image swatch: only its central half counts (a dark border must not change the result)
    tile = np.zeros((16, 16, 3), np.uint8)
    tile[4:12, 4:12] = swatch.astype(np.uint8)
    assert qa.swatch_delta_e(tile, lab_ref) == pytest.approx(expected, abs=0.01)


def test_colour_check_limits():
    img, cov = packshot()
    from variantshot.imaging.colour import lab_from_srgb8

    lab = lab_from_srgb8(np.array([150.0, 60.0, 40.0]))
    same = qa.run_qa(img, coverage=cov, colour_lab_d65=lab, swatch_srgb8=[150, 60, 40])
    assert same.check("colour_delta_e").status == "pass"
    assert same.check("colour_delta_e").value == pytest.approx(0.0, abs=1e-6)
    assert same.to_dict()["product_colour"]["delta_e_2000"] == pytest.approx(0.0, abs=0.01)
    off = qa.run_qa(img, coverage=cov, colour_lab_d65=lab, swatch_srgb8=[170, 60, 40])
    de = off.check("colour_delta_e").value
    assert de > 2.0 and off.check("colour_delta_e").status == "fail"
    lenient = qa.QASettings(delta_e_max=de + 1, delta_e_warn=1.0)
    assert qa.run_qa(img, coverage=cov, colour_lab_d65=lab, swatch_srgb8=[170, 60, 40],
                     settings=lenient).check("colour_delta_e").status == "warn"


def test_settings_are_validated_and_input_types_checked():
    with pytest.raises(ValueError):
        qa.QASettings(delta_e_max=1.0, delta_e_warn=1.5)
    with pytest.raises(TypeError):
        qa.run_qa(np.zeros((4, 4, 3)))
    with pytest.raises(ValueError):
        qa.run_qa(np.zeros((4, 4, 3), np.uint8), coverage=np.zeros((3, 3)))


def test_worst_status():
    assert qa.worst_status([]) == "pass"
    assert qa.worst_status(["pass", "warn"]) == "warn"
    assert qa.worst_status(["warn", "fail", "pass"]) == "fail"


def test_purity_with_the_compositing_shadow_map():
    img, cov = packshot(shadow=False)
    shadow = np.ones((200, 200))
    shadow[180:200, :] = 0.9  # a long shadow band at the bottom, inside the shadow map
    img[180:200, :] = 230
    # every grey pixel lies where the shadow map says "shadowed", so nothing judged is grey
    res = qa.run_qa(img, coverage=cov, shadow=shadow)
    assert res.check("background_purity").value == 1.0
    img[0, 0] = 254  # one near-white pixel outside the shadow is counted
    n_judged = 200 * 200 - 170 * 170 - (20 * 200 - 170 * 5)
    res = qa.run_qa(img, coverage=cov, shadow=shadow)
    assert res.check("background_purity").value == pytest.approx(1 - 1 / n_judged, abs=1e-5)
