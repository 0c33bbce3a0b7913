"""The subtype colours stay apart for readers with colour-vision deficiency."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from matplotlib.colors import to_rgb

from strataweave.report.palette import SEQUENTIAL, SUBTYPE_COLOURS, subtype_colour, subtype_colours

# Machado, Oliveira & Fernandes (2009), IEEE TVCG 15(6):1291-1298, simulation matrices for
# severity 1.0 in linear RGB (recalled from memory; each row sums to 1, checked below).
DEFICIENCY = {
    "protanopia": [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216], [-0.003882, -0.048116, 1.051998]],
    "deuteranopia": [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413], [-0.011820, 0.042940, 0.968881]],
    "tritanopia": [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.148602], [0.004733, 0.691367, 0.303900]],
    "normal vision": np.eye(3).tolist(),
}


def _linear(srgb: np.ndarray) -> np.ndarray:
    # IEC 61966-2-1 sRGB transfer function.
    return np.where(srgb <= 0.04045, srgb / 12.92, ((srgb + 0.055) / 1.055) ** 2.4)


def _lab(linear_rgb: np.ndarray) -> np.ndarray:
    # sRGB (D65) to XYZ to CIELAB, CIE 1976 formulas.
    xyz = linear_rgb @ np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]]).T
    xyz = xyz / np.array([0.95047, 1.0, 1.08883])
    f = np.where(xyz > 0.008856, np.cbrt(xyz), 7.787 * xyz + 16 / 116)
    return np.stack([116 * f[:, 1] - 16, 500 * (f[:, 0] - f[:, 1]), 200 * (f[:, 1] - f[:, 2])], axis=1)


def test_simulation_matrices_preserve_white():
    for matrix in DEFICIENCY.values():
        assert np.allclose(np.sum(matrix, axis=1), 1.0, atol=2e-3)


@pytest.mark.parametrize("vision", list(DEFICIENCY))
def test_subtype_colours_stay_distinguishable(vision):
    rgb = _linear(np.array([to_rgb(c) for c in SUBTYPE_COLOURS]))
    lab = _lab(np.clip(rgb @ np.array(DEFICIENCY[vision]).T, 0, 1))
    smallest = min(np.linalg.norm(lab[i] - lab[j]) for i, j in itertools.combinations(range(len(lab)), 2))
    # Delta E of about 10 is clearly distinguishable for adjacent patches (common practice); we keep 20.
    assert smallest > 20, f"two subtype colours nearly merge under {vision}: delta E {smallest:.1f}"


def test_subtype_colour_is_fixed_by_code():
    assert subtype_colours(3) == [subtype_colour(0), subtype_colour(1), subtype_colour(2)]
    assert subtype_colour(len(SUBTYPE_COLOURS)) == subtype_colour(0)
    assert len(set(SUBTYPE_COLOURS)) == len(SUBTYPE_COLOURS)


@pytest.mark.parametrize("vision", sorted(DEFICIENCY))
def test_sequential_map_darkens_steadily_for_every_reader(vision):
    """0..1 values (consensus, evidence) read by lightness alone: CIELAB L* falls all the way along the map."""
    colours = np.array([SEQUENTIAL(x)[:3] for x in np.linspace(0, 1, 64)])
    lightness = _lab(np.clip(_linear(colours) @ np.array(DEFICIENCY[vision]).T, 0, 1))[:, 0]
    assert np.all(np.diff(lightness) < 0)
    assert lightness[0] - lightness[-1] > 80
