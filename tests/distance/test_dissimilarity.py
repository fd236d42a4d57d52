"""Community dissimilarities against scipy and against per-pair published formulas."""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

from gradients import InputError
from gradients.distance import METRICS, DistanceMatrix, dissimilarity, gower_distance


def _table(seed: int = 0, n: int = 25, p: int = 15, lam: float = 1.2) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    x = rng.poisson(lam, size=(n, p)).astype(float)
    x[x.sum(axis=1) == 0, 0] = 1.0  # no empty sites in the general checks
    return pd.DataFrame(x, index=[f"site{i}" for i in range(n)],
                        columns=[f"taxon{k}" for k in range(p)])


def _per_pair(x: np.ndarray, f) -> np.ndarray:
    return np.array([f(x[i], x[j]) for i, j in itertools.combinations(range(len(x)), 2)])


# ------------------------------------------------------------------ reference library: scipy
@pytest.mark.parametrize(
    ("metric", "scipy_name"),
    [("bray-curtis", "braycurtis"), ("euclidean", "euclidean"), ("manhattan", "cityblock"),
     ("canberra", "canberra")],
)
@pytest.mark.parametrize("seed", [0, 1])
def test_equals_scipy_pdist(metric, scipy_name, seed):
    # reference library: scipy.spatial.distance.pdist on the same table
    t = _table(seed)
    d = dissimilarity(t, metric)
    np.testing.assert_allclose(d.condensed, pdist(t.to_numpy(), scipy_name), rtol=1e-12,
                               atol=1e-15)
    assert d.metric == metric
    assert d.labels.equals(t.index)


def test_canberra_and_euclidean_take_signed_values_like_scipy():
    # reference library: scipy's canberra uses |u - v| / (|u| + |v|), 0/0 terms dropped
    x = np.random.default_rng(7).normal(size=(12, 6))
    x[0, :3] = 0
    x[1, :3] = 0
    t = pd.DataFrame(x)
    np.testing.assert_allclose(dissimilarity(t, "canberra").condensed, pdist(x, "canberra"),
                               rtol=1e-12)
    np.testing.assert_allclose(dissimilarity(t, "euclidean").condensed, pdist(x), rtol=1e-12)


def test_jaccard_equals_scipy_on_booleans():
    # reference library: scipy's jaccard on boolean vectors is (TF + FT) / (TT + TF + FT);
    # it needs booleans (on numbers it would compare values, not presences)
    t = _table(2)
    np.testing.assert_allclose(dissimilarity(t, "jaccard").condensed,
                               pdist(t.to_numpy() > 0, "jaccard"), rtol=1e-12, atol=1e-15)


def test_sorensen_equals_scipy_dice_and_binary_bray_curtis():
    # reference library: scipy's dice on booleans is (TF + FT) / (2 TT + TF + FT), the
    # Sørensen dissimilarity; Bray-Curtis on presences is Sørensen (Legendre & Legendre 2012,
    # ch. 7)
    t = _table(3)
    sor = dissimilarity(t, "sorensen")
    np.testing.assert_allclose(sor.condensed, pdist(t.to_numpy() > 0, "dice"), rtol=1e-12,
                               atol=1e-15)
    bc = dissimilarity(t, "bray-curtis", binary=True)
    np.testing.assert_allclose(bc.condensed, sor.condensed, rtol=1e-12, atol=1e-15)
    assert bc.transform == "presence"


# ------------------------------------------------------------------ published definitions
def test_hellinger_is_euclidean_of_sqrt_relative():
    # Legendre & Gallagher 2001: Hellinger distance = Euclidean distance between
    # sqrt(y_ij / y_i+) profiles
    t = _table(4)
    x = t.to_numpy()
    ref = pdist(np.sqrt(x / x.sum(axis=1, keepdims=True)))
    np.testing.assert_allclose(dissimilarity(t, "hellinger").condensed, ref, rtol=1e-12)
    # the same through transform= then Euclidean
    via = dissimilarity(t, "euclidean", transform="hellinger")
    np.testing.assert_allclose(via.condensed, ref, rtol=1e-12)
    assert via.transform == "hellinger"


def test_chord_formula():
    # Legendre & Legendre 2012, ch. 7, chord distance D3 (Orlóci 1967; numbering from memory):
    # D = sqrt(2 (1 - sum y1 y2 / sqrt(sum y1^2 sum y2^2)))
    t = _table(5)

    def chord(a, b):
        return np.sqrt(max(0.0, 2 * (1 - a @ b / np.sqrt((a @ a) * (b @ b)))))

    np.testing.assert_allclose(dissimilarity(t, "chord").condensed,
                               _per_pair(t.to_numpy(), chord), rtol=1e-9, atol=1e-12)


def test_chi_square_formula():
    # Legendre & Legendre 2012, ch. 7, chi-square distance D16 (numbering from memory):
    # D = sqrt(y_++ sum_j (1 / y_+j) (y1j / y1+ - y2j / y2+)^2)
    t = _table(6)
    t["never"] = 0.0  # a taxon absent everywhere contributes nothing
    x = t.to_numpy()
    col = x.sum(axis=0)
    grand = x.sum()
    keep = col > 0

    def chi(a, b):
        return np.sqrt(grand * np.sum(((a / a.sum() - b / b.sum())[keep]) ** 2 / col[keep]))

    np.testing.assert_allclose(dissimilarity(t, "chi-square").condensed, _per_pair(x, chi),
                               rtol=1e-12)


def test_ruzicka_formula():
    # Ružička (quantitative Jaccard), Legendre & Legendre 2012, ch. 7:
    # D = 1 - sum min(y1, y2) / sum max(y1, y2)
    t = _table(7)
    ref = _per_pair(t.to_numpy(), lambda a, b: 1 - np.minimum(a, b).sum() / np.maximum(a, b).sum())
    np.testing.assert_allclose(dissimilarity(t, "ruzicka").condensed, ref, rtol=1e-12, atol=1e-15)


def test_kulczynski_formula():
    # Kulczynski S18, Legendre & Legendre 2012, ch. 7 (numbering from memory):
    # S = (W/A + W/B) / 2, D = 1 - S
    t = _table(8)

    def kul(a, b):
        w = np.minimum(a, b).sum()
        return 1 - 0.5 * (w / a.sum() + w / b.sum())

    np.testing.assert_allclose(dissimilarity(t, "kulczynski").condensed,
                               _per_pair(t.to_numpy(), kul), rtol=1e-12, atol=1e-15)


def test_morisita_horn_formula():
    # Horn 1966 (Am. Nat. 100:419): C = 2 sum x y / ((dx + dy) X Y), dx = sum x^2 / X^2
    t = _table(9)

    def mh(a, b):
        da = (a @ a) / a.sum() ** 2
        db = (b @ b) / b.sum() ** 2
        return 1 - 2 * (a @ b) / ((da + db) * a.sum() * b.sum())

    np.testing.assert_allclose(dissimilarity(t, "morisita-horn").condensed,
                               _per_pair(t.to_numpy(), mh), rtol=1e-10, atol=1e-12)


def test_identical_sites_are_zero_not_negative():
    # theory: d(x, x) = 0 for every coefficient; rounding must not make it negative
    row = np.array([0.3, 1.7, 2.9, 0.0, 11.1])
    t = pd.DataFrame([row, row, row * 2], index=["a", "b", "c"])
    for metric in METRICS:
        d = dissimilarity(t, metric)
        assert d["a", "b"] == 0.0, metric


def test_float32_storage_matches_float64():
    t = _table(10)
    d64 = dissimilarity(t, "bray-curtis")
    d32 = dissimilarity(t, "bray-curtis", dtype=np.float32)
    assert d32.dtype == np.float32
    np.testing.assert_allclose(d32.condensed, d64.condensed, rtol=1e-6)


# ------------------------------------------------------------------ Gower (1971) by hand
def _mixed():
    return pd.DataFrame(
        {
            "ph": [5.0, 6.0, 8.0],
            "soil": pd.array(["clay", "sand", "clay"], dtype="string"),
            "fish": [True, False, False],
            "depth": [1.0, np.nan, 3.0],
        },
        index=["a", "b", "c"],
    )


def test_gower_hand_computation():
    # Gower 1971 (Biometrics 27:857), worked by hand on this table:
    # ranges: ph 3, depth 2. fish is dichotomous (a pair of absences is no comparison),
    # soil qualitative, depth missing at b (no comparison).
    # (a,b): ph 1-1/3, soil 0, fish 0 -> S = (2/3)/3 = 2/9
    # (a,c): ph 1-3/3 = 0, soil 1, fish 0, depth 1-2/2 = 0 -> S = 1/4
    # (b,c): ph 1-2/3 = 1/3, soil 0 (fish F/F and depth missing skipped) -> S = (1/3)/2 = 1/6
    d = dissimilarity(_mixed(), "gower")
    np.testing.assert_allclose(d.condensed, [1 - 2 / 9, 1 - 1 / 4, 1 - 1 / 6], rtol=1e-12)
    # weights (Gower 1971, w_k): ph weight 2 -> (a,b): (2*2/3)/(2+1+1) = 1/3
    w = dissimilarity(_mixed(), "gower", weights={"ph": 2.0})
    assert w["a", "b"] == pytest.approx(1 - 1 / 3, rel=1e-12)
    # a 0/1 numeric column declared dichotomous behaves like the boolean one
    m = _mixed().assign(fish=[1, 0, 0])
    g = dissimilarity(m, "gower", variable_types={"fish": "dichotomous"})
    np.testing.assert_allclose(g.condensed, d.condensed, rtol=1e-12)


def _gower_table(seed, n=18):
    rng = np.random.default_rng(seed)
    return pd.DataFrame({
        "ph": rng.normal(6.5, 0.8, n),
        "depth": rng.gamma(2.0, 1.5, n),
        "soil": pd.array(rng.choice(["clay", "loam", "sand", "peat"], n), dtype="string"),
        "grazed": rng.random(n) < 0.4,
        "fish": rng.random(n) < 0.5,
    }, index=[f"g{i:02d}" for i in range(n)])


def test_gower_special_cases_equal_scipy_coefficients():
    # Gower (1971) notes that his coefficient contains familiar ones as special cases (from
    # memory of the paper's discussion; each identity follows from the definition): with only
    # quantitative variables 1 - S is the range-scaled Manhattan distance divided by the
    # number of variables (scipy 'cityblock' on x / R_k, or weighted 'minkowski' p = 1 over the
    # sum of weights); with only dichotomous variables (pairs of absences ignored) it is
    # Jaccard's dissimilarity (scipy 'jaccard'); with only qualitative variables it is the
    # share of mismatches (scipy 'hamming' on the codes).
    t = _gower_table(3)
    quant = t[["ph", "depth"]]
    scaled = (quant / (quant.max() - quant.min())).to_numpy()
    np.testing.assert_allclose(gower_distance(quant).condensed,
                               pdist(scaled, "cityblock") / 2, rtol=1e-12)
    w = {"ph": 3.0, "depth": 1.0}
    np.testing.assert_allclose(gower_distance(quant, weights=w).condensed,
                               pdist(scaled, "minkowski", p=1, w=[3.0, 1.0]) / 4, rtol=1e-12)
    binary = t[["grazed", "fish"]]
    both_absent = pdist(binary.to_numpy(), lambda a, b: not (a.any() or b.any())).astype(bool)
    jac = pdist(binary.to_numpy(), "jaccard")
    gd = gower_distance(binary, empty="max").condensed
    np.testing.assert_allclose(gd[~both_absent], jac[~both_absent], rtol=1e-12)
    assert np.all(gd[both_absent] == 1.0)  # no comparison at all: the `empty` choice
    codes = t[["soil"]].assign(ph=pd.cut(t["ph"], 3, labels=["lo", "mid", "hi"]).astype(str))
    numeric = np.column_stack([pd.factorize(codes[c])[0] for c in codes.columns])
    np.testing.assert_allclose(gower_distance(codes).condensed, pdist(numeric, "hamming"),
                               rtol=1e-12)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_gower_similarity_is_positive_semidefinite_without_missing_values(seed):
    # Gower (1971), the result stated in its abstract: the matrix of S_ij (S_ii = 1) is
    # positive semi-definite except possibly when there are missing values, so sqrt(1 - S)
    # is Euclidean. Checked on tables of every variable type with numpy's eigenvalues
    # (tolerance 1e-10 of the largest).
    t = _gower_table(seed, n=25)
    d = gower_distance(t)
    sim = 1 - d.square()
    vals = np.linalg.eigvalsh(sim)
    assert vals.min() >= -1e-10 * vals.max()
    # hence the doubly centred -0.5 (sqrt(1 - S))^2 = 0.5 (S - 1) is PSD too (Gower 1966)
    n = len(t)
    h = np.eye(n) - 1 / n
    g = h @ (0.5 * (sim - 1)) @ h
    gv = np.linalg.eigvalsh(g)
    assert gv.min() >= -1e-10 * gv.max()


def test_gower_pair_with_nothing_to_compare():
    t = pd.DataFrame({"x": [1.0, np.nan, 2.0], "y": [np.nan, 5.0, 6.0]}, index=list("pqr"))
    with pytest.raises(InputError, match=r"\('p', 'q'\)"):
        dissimilarity(t, "gower")
    assert dissimilarity(t, "gower", empty="max")["p", "q"] == 1.0


# ------------------------------------------------------------------ undefined pairs
def _with_empty():
    t = _table(11, n=6)
    t.loc["e1"] = 0.0
    t.loc["e2"] = 0.0
    return t


def test_two_empty_sites_error_names_them():
    with pytest.raises(InputError, match=r"\('e1', 'e2'\).*no taxa: 'e1', 'e2'") as info:
        dissimilarity(_with_empty(), "bray-curtis")
    assert set(info.value.sites) == {"e1", "e2"}


def test_empty_options():
    t = _with_empty()
    d = dissimilarity(t, "bray-curtis", empty="zero")
    assert d["e1", "e2"] == 0.0
    assert d["e1", "site0"] == 1.0  # defined: sum|x - 0| / sum x = 1
    h = dissimilarity(t, "hellinger", empty="alike")
    assert h["e1", "e2"] == 0.0
    assert h["e1", "site0"] == pytest.approx(np.sqrt(2))
    assert dissimilarity(t, "hellinger", empty="max")["e1", "e2"] == pytest.approx(np.sqrt(2))
    with pytest.raises(InputError, match="has none"):
        dissimilarity(t, "chi-square", empty="max")
    # reference library: scipy gives 0 for two all-False vectors under jaccard
    j = dissimilarity(t, "jaccard", empty="zero")
    np.testing.assert_allclose(j.condensed, pdist(t.to_numpy() > 0, "jaccard"), atol=1e-15)


def test_single_empty_site_breaks_profile_metrics():
    t = _table(12, n=5)
    t.loc["bare"] = 0.0
    with pytest.raises(InputError, match="no taxa: 'bare'"):
        dissimilarity(t, "hellinger")
    # Bray-Curtis is defined for one empty site against occupied ones
    assert dissimilarity(t, "bray-curtis")["bare", "site1"] == 1.0


# ------------------------------------------------------------------ input errors
def test_bad_inputs_named():
    t = _table(13, n=4)
    t.iloc[2, 3] = -1
    with pytest.raises(InputError, match=r"non-negative; negative at site 'site2', column "
                                         r"'taxon3'"):
        dissimilarity(t, "bray-curtis")
    t = _table(13, n=4)
    t.iloc[1, 0] = np.nan
    with pytest.raises(InputError, match=r"missing values at site 'site1', column 'taxon0'"):
        dissimilarity(t)
    t = _table(13, n=4).assign(note="x")
    with pytest.raises(InputError, match=r"column\(s\) 'note'"):
        dissimilarity(t)
    with pytest.raises(InputError, match="`metric` must be one of"):
        dissimilarity(_table(), "braycurtis")
    with pytest.raises(InputError, match="metric='ruzicka'"):
        dissimilarity(_table(), "jaccard", binary=False)


def test_survey_like_object_is_accepted():
    class Holder:
        community = _table(14, n=5)

    assert dissimilarity(Holder()) == dissimilarity(Holder.community)


# ------------------------------------------------------------------ extended dissimilarity
def _chain():
    # four sites along a gradient, each sharing taxa only with its neighbours
    return pd.DataFrame(
        [[3, 1, 0, 0, 0], [0, 1, 1, 0, 0], [0, 0, 1, 1, 0], [0, 0, 0, 1, 3]],
        index=list("ABCD"), columns=[f"t{k}" for k in range(5)], dtype=float,
    )


def test_extended_chain_hand_computed():
    # Bray-Curtis by hand: A-B (3+0+1)/(4+2) = 2/3, B-C (1+0+1)/4 = 1/2, C-D (1+0+3)/6 = 2/3;
    # A-C, B-D, A-D share no taxa (1, saturated). De'ath 1999: replace them by path sums:
    # A-C = 2/3 + 1/2 = 7/6, B-D = 1/2 + 2/3 = 7/6, A-D = 2/3 + 1/2 + 2/3 = 11/6.
    plain = dissimilarity(_chain())
    np.testing.assert_allclose(plain.condensed, [2 / 3, 1, 1, 1 / 2, 1, 2 / 3], rtol=1e-12)
    ext = dissimilarity(_chain(), extended=True)
    np.testing.assert_allclose(ext.condensed, [2 / 3, 7 / 6, 11 / 6, 1 / 2, 7 / 6, 2 / 3],
                               rtol=1e-12)
    assert ext.metric == "extended bray-curtis"


def test_extended_disconnected_names_groups():
    t = _chain()
    t["t5"] = 0.0
    t.loc["E"] = [0, 0, 0, 0, 0, 2.0]
    with pytest.raises(InputError, match=r"2 separate groups: \['A', 'B', 'C', 'D'\]; \['E'\]"):
        dissimilarity(t, extended=True)


def test_extended_threshold():
    # with saturated=0.6 the pairs at 2/3 also count as saturated; then A and D are cut off
    with pytest.raises(InputError, match="separate groups"):
        dissimilarity(_chain(), extended=True, saturated=0.6)
    d = dissimilarity(_chain(), "euclidean", extended=True, saturated=100.0)
    assert d == DistanceMatrix(dissimilarity(_chain(), "euclidean").condensed, list("ABCD"))
    with pytest.raises(InputError, match="`saturated=`"):
        dissimilarity(_chain(), "euclidean", extended=True)


def test_gower_site_without_values_named():
    t = pd.DataFrame({"x": [1.0, np.nan, 2.0], "y": [3.0, np.nan, 6.0]}, index=list("pqr"))
    with pytest.raises(InputError, match=r"site\(s\) with no value to compare: 'q'"):
        dissimilarity(t, "gower")


def test_extended_equals_floyd_warshall_on_saturated_pairs():
    # Two ways agree: a plain Floyd-Warshall written here over the unsaturated pairs gives the
    # path lengths; saturated pairs take them, unsaturated pairs keep their own value.
    rng = np.random.default_rng(21)
    x = np.zeros((14, 32))
    for i in range(14):  # a long gradient: each site holds a window of taxa
        x[i, 2 * i : 2 * i + 5] = rng.integers(1, 6, size=5)
    t = pd.DataFrame(x, index=[f"q{i}" for i in range(14)])
    plain = dissimilarity(t).square()
    sat = plain >= 1 - 1e-10
    np.fill_diagonal(sat, False)
    assert sat.any()
    paths = np.where(sat, np.inf, plain)
    for k in range(14):
        paths = np.minimum(paths, paths[:, [k]] + paths[[k], :])
    expect = np.where(sat, paths, plain)
    np.testing.assert_allclose(dissimilarity(t, extended=True).square(), expect, rtol=1e-12)


@pytest.mark.parametrize("seed", [4, 5, 6])
@pytest.mark.parametrize("method", ["FW", "BF", "J"])
def test_extended_equals_scipy_csgraph_shortest_paths(seed, method):
    # Reference library: scipy.sparse.csgraph.shortest_path by Floyd-Warshall, Bellman-Ford
    # and Johnson (the suite calls Dijkstra) on the graph of unsaturated pairs (De'ath 1999):
    # saturated pairs take the shortest path length, the others keep their own value.
    from scipy.sparse.csgraph import shortest_path

    rng = np.random.default_rng(seed)
    n, width = 24, 6
    x = np.zeros((n, 3 * n))
    order = rng.permutation(n)  # sites along a long gradient, in random row order
    for row, pos in enumerate(order):
        x[row, 2 * pos : 2 * pos + width] = rng.integers(1, 9, size=width)
    t = pd.DataFrame(x, index=[f"e{i:02d}" for i in range(n)])
    for metric in ("bray-curtis", "jaccard"):
        plain = dissimilarity(t, metric).square()
        sat = plain >= 1 - 1e-10
        np.fill_diagonal(sat, False)
        assert sat.sum() > n  # a long gradient: many pairs share no taxa
        graph = np.where(sat, 0.0, plain)  # csgraph reads 0 as "no edge"
        paths = shortest_path(graph, method=method, directed=False)
        expect = np.where(sat, paths, plain)
        np.testing.assert_allclose(dissimilarity(t, metric, extended=True).square(), expect,
                                   rtol=1e-12)


@pytest.mark.parametrize("metric", [m for m in METRICS if METRICS[m].upper is not None])
def test_bounded_coefficients_stay_in_range(metric):
    # theory: each bounded coefficient lies in [0, its maximum] (1, or sqrt(2) for chord and
    # Hellinger: distances between points on the unit sphere's positive orthant)
    t = _table(30, n=30, p=8, lam=0.7)
    d = dissimilarity(t, metric).condensed
    assert d.min() >= 0
    assert d.max() <= METRICS[metric].upper + 1e-12
