"""Tests of the house style of ``gradients.plot``.

The colour-vision checks use the simulation matrices of Machado, Oliveira & Fernandes (2009,
IEEE TVCG 15:1291; severity 1.0, values from memory) and the CIE 1976 L*a*b* formulas (CIE
15:2004, sRGB per IEC 61966-2-1, from memory).
"""

from __future__ import annotations

import itertools

import matplotlib as mpl
import numpy as np
import pandas as pd
import pytest
from matplotlib.colors import to_rgba
from matplotlib.figure import Figure

from gradients import plot
from gradients.plot import _style as S

_MACHADO_2009 = {  # severity 1.0, linear RGB (Machado et al. 2009; from memory)
    "protanopia": [
        [0.152286, 1.052583, -0.204868],
        [0.114503, 0.786281, 0.099216],
        [-0.003882, -0.048116, 1.051998],
    ],
    "deuteranopia": [
        [0.367322, 0.860646, -0.227968],
        [0.280085, 0.672501, 0.047413],
        [-0.011820, 0.042940, 0.968881],
    ],
    "tritanopia": [
        [1.255528, -0.076749, -0.178779],
        [-0.078411, 0.930809, 0.147602],
        [0.004733, 0.691367, 0.303900],
    ],
    "normal": np.eye(3).tolist(),
}


def _lab(rgb: np.ndarray, matrix) -> np.ndarray:
    """sRGB (0-1) -> simulated CIE L*a*b* (D65), per IEC 61966-2-1 and CIE 15 (from memory)."""
    lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    lin = np.clip(np.asarray(matrix) @ lin, 0, 1)
    xyz = (
        np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]])
        @ lin
    )
    t = xyz / np.array([0.95047, 1.0, 1.08883])
    f = np.where(t > (6 / 29) ** 3, np.cbrt(t), t / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


@pytest.mark.parametrize("vision", list(_MACHADO_2009))
def test_palette_separable_under_colour_vision_deficiency(vision):
    labs = [_lab(np.array(to_rgba(c)[:3]), _MACHADO_2009[vision]) for c in S.PALETTE[:6]]
    gaps = [np.linalg.norm(a - b) for a, b in itertools.combinations(labs, 2)]
    # CIE76 difference of 15 or more: clearly different side by side (common practice: ~2.3
    # is a just-noticeable difference, ~10 easy to tell apart)
    assert min(gaps) >= 15


@pytest.mark.parametrize("vision", ["normal", "deuteranopia", "protanopia"])
def test_sequential_map_lightness_monotone(vision):
    rgb = S.SEQUENTIAL_CMAP(np.linspace(0, 1, 64))[:, :3]
    lightness = np.array([_lab(c, _MACHADO_2009[vision])[0] for c in rgb])
    assert np.all(np.diff(lightness) < 0)  # greyscale print keeps the order
    assert lightness[0] - lightness[-1] > 60


def test_house_style_is_scoped_and_not_the_default():
    before = dict(mpl.rcParams)
    with plot.house_style(**{"font.size": 9.5}):
        assert mpl.rcParams["font.size"] == 9.5
        assert mpl.rcParams["svg.hashsalt"] == "gradients-figure"
        assert mpl.rcParams["text.parse_math"] is False
    assert dict(mpl.rcParams) == before
    defaults = mpl.rcParamsDefault
    differs = [
        k
        for k in (
            "axes.titlelocation",
            "axes.spines.top",
            "axes.grid",
            "axes.prop_cycle",
            "axes.edgecolor",
            "font.size",
            "legend.frameon",
        )
        if S.HOUSE_RC[k] != defaults[k]
    ]
    assert len(differs) == 7
    # the figures made here draw with the house style even though it is off outside them
    ax = plot.ranking(pd.DataFrame({"r2": [0.3]}, index=["Cu"]), pvalue=None)
    assert not ax.spines["top"].get_visible()
    assert ax.get_title(loc="left") == "Ranking of variables"  # titles flush left
    assert ax.get_title(loc="center") == ""
    assert ax.get_xticklabels()[0].get_fontsize() == S.HOUSE_RC["xtick.labelsize"]


def test_the_caller_s_axes_keep_the_caller_s_style():
    # drawn into the caller's axes, tick labels follow the caller's settings, not ours
    with mpl.rc_context({"xtick.labelsize": 13.0}):
        ax = Figure().add_subplot()
        plot.ranking(pd.DataFrame({"r2": [0.3]}, index=["Cu"]), pvalue=None, ax=ax)
        ax.figure.draw_without_rendering()
        assert ax.get_xticklabels()[0].get_fontsize() == 13.0
        assert ax.spines["top"].get_visible()


def test_groups_get_distinct_colour_and_shape_pairs():
    # 7 colours and 8 shapes (coprime): the first 7 x 8 = 56 groups all differ (Chinese
    # remainder theorem)
    pairs = [S.group_style(i) for i in range(56)]
    assert len(set(pairs)) == 56
    assert S.group_style(56) == S.group_style(0)
