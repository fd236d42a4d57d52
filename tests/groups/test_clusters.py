"""Site clustering: trees worked by hand, cophenetic correlation, silhouettes, contiguity."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from scipy.cluster.hierarchy import linkage

from gradients import DistanceMatrix, InputError, cluster_sites
from gradients.groups._clusters import silhouette_widths

# Five sites, worked by hand below (average linkage, UPGMA).
HAND = np.array([
    [0, 2, 6, 10, 9],
    [2, 0, 5, 9, 8],
    [6, 5, 0, 4, 5],
    [10, 9, 4, 0, 3],
    [9, 8, 5, 3, 0],
], dtype=float)


def _matrix(square: np.ndarray, labels=None) -> DistanceMatrix:
    labels = labels or [f"s{i + 1}" for i in range(len(square))]
    return DistanceMatrix.from_square(square, labels=labels)


def _line(values) -> np.ndarray:
    v = np.asarray(values, dtype=float)
    return np.abs(v[:, None] - v[None, :])


def test_average_linkage_tree_worked_by_hand():
    # By hand (UPGMA: the dissimilarity to a merged cluster is the mean over its members):
    # 1. smallest is d(s1, s2) = 2 -> {s1 s2} (id 5) at 2; to s3 (6 + 5)/2 = 5.5, s4 9.5,
    #    s5 8.5.
    # 2. smallest is d(s4, s5) = 3 -> {s4 s5} (id 6) at 3; to s3 (4 + 5)/2 = 4.5, to {s1 s2}
    #    (10 + 9 + 9 + 8)/4 = 9.
    # 3. smallest is d(s3, {s4 s5}) = 4.5 -> {s3 s4 s5} (id 7) at 4.5.
    # 4. {s1 s2} with {s3 s4 s5} at (6 + 5 + 10 + 9 + 9 + 8)/6 = 47/6.
    res = cluster_sites(_matrix(HAND), "average", k=2)
    expected = np.array([[0, 1, 2.0, 2], [3, 4, 3.0, 2], [2, 6, 4.5, 3], [5, 7, 47 / 6, 5]])
    np.testing.assert_allclose(res.linkage, expected, rtol=1e-12)
    assert res.membership.tolist() == [1, 1, 2, 2, 2]


def test_cophenetic_correlation_from_the_merge_heights():
    # Merge heights of the tree above, written out pair by pair (Sokal & Rohlf 1962: the
    # cophenetic value of a pair is the height at which the two sites are first joined):
    # s1-s2 2; s4-s5 3; s3-s4, s3-s5 4.5; every pair across {s1 s2} | {s3 s4 s5} 47/6.
    c = 47 / 6
    pairs = {(0, 1): 2, (0, 2): c, (0, 3): c, (0, 4): c, (1, 2): c, (1, 3): c, (1, 4): c,
             (2, 3): 4.5, (2, 4): 4.5, (3, 4): 3}
    d = [HAND[i, j] for i, j in pairs]
    coph = list(pairs.values())
    expected = np.corrcoef(d, coph)[0, 1]  # Pearson correlation, numpy
    res = cluster_sites(_matrix(HAND), "average", k=2)
    assert res.cophenetic_correlation == pytest.approx(expected, rel=1e-12)


def test_silhouette_from_its_definition():
    # Rousseeuw (1987): a(i) mean dissimilarity to its own cluster's other sites, b(i) the
    # smallest mean dissimilarity to another cluster, s(i) = (b - a) / max(a, b), 0 for a site
    # alone in its cluster.
    rng = np.random.default_rng(3)
    pts = np.r_[rng.normal(0, 1, (6, 2)), rng.normal(4, 1, (5, 2)), [[10.0, 10.0]]]
    square = np.sqrt(((pts[:, None] - pts[None]) ** 2).sum(-1))
    clusters = np.r_[np.ones(6), np.full(5, 2), [3]].astype(int)
    s, nearest = silhouette_widths(square, clusters)
    for i in range(len(pts)):
        own = [j for j in range(len(pts)) if clusters[j] == clusters[i] and j != i]
        if not own:
            assert s[i] == 0.0
            continue
        a = np.mean(square[i, own])
        others = {c: np.mean(square[i, clusters == c]) for c in set(clusters) - {clusters[i]}}
        b = min(others.values())
        assert s[i] == pytest.approx((b - a) / max(a, b), rel=1e-12)
        assert nearest[i] == min(others, key=others.get)


def test_result_silhouette_and_choice_of_k():
    rng = np.random.default_rng(4)
    pts = np.r_[rng.normal(0, 0.3, 8), rng.normal(5, 0.3, 8), rng.normal(10, 0.3, 8)]
    res = cluster_sites(_matrix(_line(pts)), "average")
    assert res.k == 3  # three tight groups: the widest mean silhouette (Rousseeuw 1987)
    assert res.widths_by_k.idxmax() == 3
    s, _ = silhouette_widths(_line(pts), res.membership.to_numpy())
    np.testing.assert_allclose(res.table["silhouette"], s, rtol=1e-12)
    assert res.silhouette == pytest.approx(np.mean(s), rel=1e-12)
    assert sorted(res.clusters["n_sites"]) == [8, 8, 8]


@pytest.mark.parametrize("method", ["average", "complete", "ward"])
def test_a_constraint_that_allows_every_pair_gives_scipys_tree(method):
    # two ways: our constrained agglomeration with all pairs as neighbours against
    # scipy.cluster.hierarchy.linkage (reference library)
    rng = np.random.default_rng(5)
    pts = rng.normal(size=(14, 3))
    square = np.sqrt(((pts[:, None] - pts[None]) ** 2).sum(-1))
    d = _matrix(square)
    pairs = [(a, b) for i, a in enumerate(d.labels) for b in d.labels[i + 1:]]
    ours = cluster_sites(d, method, k=3, contiguous=pairs)
    theirs = linkage(d.condensed, method=method)
    np.testing.assert_allclose(ours.linkage[:, 2:], theirs[:, 2:], rtol=1e-10)
    np.testing.assert_array_equal(np.sort(ours.linkage[:, :2], axis=1),
                                  np.sort(theirs[:, :2], axis=1))


def test_transect_constraint_worked_by_hand():
    # Sites s1..s5 along a transect with one variable 0, 10, 0.7, 10.4, 20 (Euclidean). Without
    # the constraint s2 and s4 merge first (0.4), then s1 and s3 (0.7). With it, only
    # neighbours along the line may merge (by hand, average linkage):
    # 1. neighbours: s1-s2 10, s2-s3 9.3, s3-s4 9.7, s4-s5 9.6 -> {s2 s3} at 9.3;
    #    to s1 (10 + 0.7)/2 = 5.35, to s4 (0.4 + 9.7)/2 = 5.05, to s5 (10 + 19.3)/2 = 14.65.
    # 2. neighbours: s1-{s2 s3} 5.35, {s2 s3}-s4 5.05, s4-s5 9.6 -> {s2 s3 s4} at 5.05 (a
    #    reversal: lower than 9.3); to s1 (10 + 0.7 + 10.4)/3 = 21.1/3, to s5
    #    (10 + 19.3 + 9.6)/3.
    # 3. s1-{s2 s3 s4} 21.1/3 < {s2 s3 s4}-s5 38.9/3 -> {s1 .. s4} at 21.1/3.
    # 4. with s5 at (20 + 10 + 19.3 + 9.6)/4 = 58.9/4.
    d = _matrix(_line([0, 10, 0.7, 10.4, 20]))
    free = cluster_sites(d, "average", k=2)
    np.testing.assert_allclose(free.linkage[:2, :3], [[1, 3, 0.4], [0, 2, 0.7]], rtol=1e-12)
    res = cluster_sites(d, "average", k=2, contiguous="transect")
    expected = np.array([[1, 2, 9.3, 2], [3, 5, 5.05, 3], [0, 6, 21.1 / 3, 4],
                         [4, 7, 58.9 / 4, 5]])
    np.testing.assert_allclose(res.linkage, expected, rtol=1e-12)
    assert res.membership.tolist() == [1, 1, 1, 1, 2]
    assert any("reversal" in n for n in res.notes)
    assert res.edges == (("s1", "s2"), ("s2", "s3"), ("s3", "s4"), ("s4", "s5"))


def test_transect_positions_set_the_order():
    d = _matrix(_line([0, 10, 0.7, 10.4, 20]))
    where = pd.Series([0.0, 3.0, 1.0, 4.0, 2.0], index=d.labels)  # order s1 s3 s5 s2 s4
    res = cluster_sites(d, "average", k=2, contiguous="transect", locations=where)
    assert set(res.edges) == {("s1", "s3"), ("s3", "s5"), ("s5", "s2"), ("s2", "s4")}


def _connected(members: list[str], edges: set[frozenset[str]]) -> bool:
    seen, todo = {members[0]}, [members[0]]
    while todo:
        a = todo.pop()
        for b in members:
            if b not in seen and frozenset((a, b)) in edges:
                seen.add(b)
                todo.append(b)
    return seen == set(members)


@pytest.mark.parametrize("neighbours", ["delaunay", 3])
def test_spatial_clusters_are_contiguous_at_every_cut(neighbours):
    rng = np.random.default_rng(7)
    n = 30
    xy = rng.uniform(0, 10, size=(n, 2))
    labels = [f"p{i:02d}" for i in range(n)]
    # communities that ignore space: an unconstrained tree scatters its clusters
    comm = rng.normal(size=(n, 4))
    square = np.sqrt(((comm[:, None] - comm[None]) ** 2).sum(-1))
    d = _matrix(square, labels)
    pts = gpd.GeoDataFrame(geometry=gpd.points_from_xy(xy[:, 0], xy[:, 1]), index=labels,
                           crs="EPSG:3857")
    res = cluster_sites(d, "average", k=5, contiguous="space", locations=pts,
                        neighbours=neighbours)
    edges = {frozenset(e) for e in res.edges}
    for k in range(2, 12):
        cut = res.cut(k)
        for c in set(cut):
            assert _connected(list(cut.index[cut == c]), edges)
    free = cluster_sites(d, "average", k=5)
    # the same graph finds some unconstrained cluster that is not contiguous
    assert not all(_connected(list(free.membership.index[free.membership == c]), edges)
                   for c in range(1, 6))


def test_space_from_longitude_latitude_and_from_a_table():
    # The Delaunay graph is the same for points in degrees (projected to a local azimuthal
    # equidistant plane) and for the same layout given as planar x/y in metres, at this scale
    rng = np.random.default_rng(8)
    lon, lat = 9.3 + rng.uniform(0, 0.1, 12), 61.0 + rng.uniform(0, 0.05, 12)
    labels = [f"q{i}" for i in range(12)]
    d = _matrix(_line(rng.normal(size=12)), labels)
    geo = gpd.GeoDataFrame(geometry=gpd.points_from_xy(lon, lat), index=labels, crs="EPSG:4326")
    a = cluster_sites(d, "average", k=2, contiguous="space", locations=geo)
    table = geo.to_crs("EPSG:32632")  # UTM 32N
    xy = pd.DataFrame({"x": table.geometry.x, "y": table.geometry.y}, index=labels)
    b = cluster_sites(d, "average", k=2, contiguous="space", locations=xy)
    assert set(a.edges) == set(b.edges)


def test_ward_needs_euclidean_dissimilarities():
    rng = np.random.default_rng(9)
    x = pd.DataFrame(rng.poisson(3, size=(15, 6)) + np.eye(15, 6, dtype=int))
    from gradients import dissimilarity

    bc = dissimilarity(x, "bray-curtis")
    with pytest.raises(InputError, match="Ward's method needs dissimilarities that embed"):
        cluster_sites(bc, "ward")
    # the square root of Bray-Curtis is Euclidean (Legendre & Legendre 2012, Table 7.2)
    root = DistanceMatrix(np.sqrt(bc.condensed), bc.labels)
    assert cluster_sites(root, "ward", k=2).k == 2
    assert cluster_sites(bc, "ward", k=2, check_euclidean=False).k == 2


def test_cut_numbers_clusters_by_first_site_and_matches_a_height_cut():
    # Without reversals, the clusters after n - k merges are those of a cut at a height
    # between the (n-k)-th merge and the next (scipy fcluster, reference library)
    from scipy.cluster.hierarchy import fcluster

    rng = np.random.default_rng(10)
    pts = rng.normal(size=(20, 2))
    square = np.sqrt(((pts[:, None] - pts[None]) ** 2).sum(-1))
    res = cluster_sites(_matrix(square), "complete", k=4)
    for k in range(2, 10):
        ours = res.cut(k).to_numpy()
        h = res.linkage[:, 2]
        theirs = fcluster(res.linkage, (h[-k] + h[-k + 1]) / 2, criterion="distance")
        assert len(set(ours)) == k
        assert len({(a, b) for a, b in zip(ours, theirs, strict=True)}) == k
        firsts = [int(np.flatnonzero(ours == c)[0]) for c in range(1, k + 1)]
        assert firsts == sorted(firsts)


def test_bad_input_is_a_clear_error():
    d = _matrix(HAND)
    with pytest.raises(InputError, match="`k` must be a whole number of clusters from 2 to 4"):
        cluster_sites(d, k=5)
    with pytest.raises(InputError, match="`method` must be one of"):
        cluster_sites(d, "single-ish")
    with pytest.raises(InputError, match="falls into 2 separate parts"):
        cluster_sites(d, contiguous=[("s1", "s2"), ("s3", "s4"), ("s4", "s5")])
    with pytest.raises(InputError, match="not in the distance matrix: 's9'"):
        cluster_sites(d, contiguous=[("s1", "s9")])
    with pytest.raises(InputError, match="needs `locations`"):
        cluster_sites(d, contiguous="space")
    with pytest.raises(InputError, match="`contiguous` must be one of"):
        cluster_sites(d, contiguous="river")
    with pytest.raises(InputError, match="at least 3 sites"):
        cluster_sites(_matrix(HAND[:2, :2]))
    pts = pd.DataFrame({"x": range(5), "y": [0, 1, 0, 1, 0]}, index=d.labels)
    with pytest.raises(InputError, match="`neighbours` must be 'delaunay' or a number"):
        cluster_sites(d, contiguous="space", locations=pts, neighbours=0)


def test_same_tree_whatever_the_site_order():
    rng = np.random.default_rng(11)
    pts = rng.normal(size=(12, 2))
    square = np.sqrt(((pts[:, None] - pts[None]) ** 2).sum(-1))
    d = _matrix(square)
    perm = rng.permutation(12)
    a = cluster_sites(d, "average", k=3)
    b = cluster_sites(d.subset(d.labels[perm]), "average", k=3)
    np.testing.assert_allclose(a.linkage[:, 2], b.linkage[:, 2], rtol=1e-12)
    assert a.cophenetic_correlation == pytest.approx(b.cophenetic_correlation, rel=1e-12)
    groups_a = {frozenset(a.membership.index[a.membership == c]) for c in range(1, 4)}
    groups_b = {frozenset(b.membership.index[b.membership == c]) for c in range(1, 4)}
    assert groups_a == groups_b
