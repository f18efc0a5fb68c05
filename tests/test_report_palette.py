"""The report's colour scale ('estuary'): ordered in lightness for every viewer, readable text.

Sources: sRGB transfer function and primaries (IEC 61966-2-1:1999) and CIE 1976 L*a*b* (CIE 15,
D65 white); colour-vision deficiency simulation matrices for severity 1.0 from Machado, Oliveira &
Fernandes (2009), A physiologically-based model for simulation of color vision deficiency, IEEE
TVCG 15(6), 1291-1298 (values from memory; each row sums to 1, checked below); contrast ratio and
the 4.5:1 threshold for normal text from WCAG 2.1, success criterion 1.4.3.
"""
import numpy as np
import pytest

from bayespool.report import palette

MACHADO_2009 = {  # severity 1.0, applied to linear RGB (from memory)
    "protan": [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216],
               [-0.003882, -0.048116, 1.051998]],
    "deutan": [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413],
               [-0.011820, 0.042940, 0.968881]],
    "tritan": [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602],
               [0.004733, 0.691367, 0.303900]],
}
SRGB_TO_XYZ = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722],
                        [0.0193, 0.1192, 0.9505]])  # IEC 61966-2-1, D65
D65 = np.array([0.95047, 1.0, 1.08883])


def linear(rgb255):
    c = np.asarray(rgb255, dtype=float) / 255.0
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def lab(lin_rgb):
    t = (lin_rgb @ SRGB_TO_XYZ.T) / D65
    f = np.where(t > 216 / 24389, np.cbrt(t), (24389 / 27 * t + 16) / 116)
    return np.stack([116 * f[..., 1] - 16, 500 * (f[..., 0] - f[..., 1]),
                     200 * (f[..., 1] - f[..., 2])], axis=-1)


def test_machado_matrices_preserve_white():
    for m in MACHADO_2009.values():
        assert np.allclose(np.sum(m, axis=1), 1.0, atol=2e-6)


def test_cie_lab_of_known_colours():
    # CIE L* of sRGB white is 100 and of black 0; mid grey #777777 is about L* 50 (from memory)
    assert lab(linear([255, 255, 255]))[0] == pytest.approx(100.0, abs=0.01)
    assert lab(linear([0, 0, 0]))[0] == pytest.approx(0.0, abs=0.01)
    assert lab(linear([119, 119, 119]))[0] == pytest.approx(50.0, abs=1.0)


def test_lightness_falls_steadily_along_the_scale():
    L = lab(linear(palette.rgb_at(np.linspace(0, 1, 513))))[:, 0]
    assert np.all(np.diff(L) < 0)
    assert L[0] - L[-1] > 80          # pale sand to deep ink
    assert L[0] > 90 and L[-1] < 15


@pytest.mark.parametrize("kind", sorted(MACHADO_2009))
def test_order_and_tick_steps_survive_colour_vision_deficiency(kind):
    m = np.array(MACHADO_2009[kind])
    sim = np.clip(linear(palette.rgb_at(np.linspace(0, 1, 513))) @ m.T, 0, 1)
    L = lab(sim)[:, 0]
    assert np.all(np.diff(L) < 0), f"lightness order broken for {kind}"
    ticks = palette.rgb_at(palette.position(np.array(palette.TICKS)))
    tl = lab(np.clip(linear(ticks) @ m.T, 0, 1))
    # neighbouring legend ticks stay clearly apart (CIE76 colour difference well above 2.3, the
    # often quoted just-noticeable difference, from memory)
    assert np.linalg.norm(np.diff(tl, axis=0), axis=1).min() > 8


def test_text_on_every_colour_meets_wcag_contrast():
    for p in np.concatenate([np.linspace(0, 1, 1001), [1e-9, 1e-4, 0.01, 0.99, 1 - 1e-9]]):
        bg = float(palette.relative_luminance(palette.rgb_at(palette.position(p))))
        fg = 0.0 if palette.ink(p) == "#000000" else 1.0
        assert palette.contrast(bg, fg) >= 4.5, p


def test_wcag_contrast_of_black_on_white_is_21():
    assert palette.contrast(1.0, 0.0) == pytest.approx(21.0)
    assert float(palette.relative_luminance([255, 255, 255])) == pytest.approx(1.0)


def test_position_is_logit_placement_clipped_and_symmetric():
    assert palette.position(0.5) == pytest.approx(0.5)
    assert palette.position(1e-4) == pytest.approx(0.0)
    assert palette.position(0.0) == pytest.approx(0.0)
    assert palette.position(1.0) == pytest.approx(1.0)
    for p in (0.001, 0.01, 0.2):
        assert palette.position(p) + palette.position(1 - p) == pytest.approx(1.0)
    p = np.linspace(1e-4, 1 - 1e-4, 999)
    assert np.all(np.diff(palette.position(p)) > 0)
    # equal steps in log-odds are equal steps on the scale
    a, b, c = palette.position([0.001, 0.01, 0.1])
    lo = lambda q: np.log(q / (1 - q))  # noqa: E731
    assert (b - a) / (c - b) == pytest.approx((lo(0.01) - lo(0.001)) / (lo(0.1) - lo(0.01)))


def test_colour_strings():
    assert palette.colour(0.0) == palette.ANCHORS[0]
    assert palette.colour(1.0) == palette.ANCHORS[-1]
    assert palette.style(0.5).startswith("background:#")


def test_vectorised_styles_equal_the_single_ones():
    p = np.concatenate([np.linspace(0, 1, 301), [1e-12, 0.0051, 0.99, 0.9999999]])
    assert palette.styles(p) == [palette.style(v) for v in p]
