"""Property tests: malformed tables give an InputError (or a valid Survey), never another error."""

from __future__ import annotations

import tempfile
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from gradients import InputError
from gradients.data import Survey, read_survey

SETTINGS = settings(max_examples=40, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])

junk = st.sampled_from(["", " ", "NA", "nan", "<0.5", "< 2", "<", "<-1", "nd", "1,5", "-0",
                        "1e400", "inf", "True", "=1+1", "x", "0", "3", "12.5", "-4", "\u00e9",
                        "<0,2", ">10", "1 000"])
cell = st.one_of(
    st.integers(-3, 50),
    st.floats(allow_nan=True, allow_infinity=True, width=32),
    st.text(max_size=5),
    junk,
    st.none(),
    st.booleans(),
)
site = st.one_of(st.sampled_from(["a", "b", "c", "d", "", " ", "a "]), st.integers(0, 4),
                 st.floats(allow_nan=True, width=16), st.none())
name = st.one_of(st.sampled_from(["site", "A", "B", "Cu", "lon", "lat", "x", "y", ""]),
                 st.text(max_size=4))


@st.composite
def frames(draw, with_site=True):
    n_rows = draw(st.integers(0, 6))
    names = draw(st.lists(name, min_size=0, max_size=4))
    if with_site and draw(st.booleans()):
        names = ["site", *names]
    rows = [[draw(site) if c == "site" else draw(cell) for c in names] for _ in range(n_rows)]
    return pd.DataFrame(rows, columns=names if names else None, dtype=object)


@st.composite
def plausible_frames(draw):
    """Mostly good tables with one or two defects, so the later checks are reached too."""
    n = draw(st.integers(2, 6))
    sites = [f"s{i}" for i in range(n)]
    if draw(st.booleans()):
        sites[draw(st.integers(0, n - 1))] = draw(site)
    counts = draw(st.lists(st.lists(st.integers(0, 5), min_size=2, max_size=2), min_size=n,
                           max_size=n))
    community = pd.DataFrame(counts, columns=["A", "B"]).astype(object)
    community.insert(0, "site", sites)
    env = pd.DataFrame({"site": [f"s{i}" for i in range(n)],
                        "Cu": draw(st.lists(st.floats(0.1, 100), min_size=n, max_size=n)),
                        "hab": draw(st.lists(st.sampled_from(["p", "r"]), min_size=n,
                                             max_size=n))}).astype(object)
    for _ in range(draw(st.integers(0, 2))):
        frame = draw(st.sampled_from([community, env]))
        i = draw(st.integers(0, n - 1))
        j = draw(st.integers(1, frame.shape[1] - 1))
        frame.iat[i, j] = draw(cell)
    loc = pd.DataFrame({"site": [f"s{i}" for i in range(n)],
                        "lon": draw(st.lists(st.floats(-200, 200), min_size=n, max_size=n)),
                        "lat": draw(st.lists(st.floats(-100, 100), min_size=n, max_size=n))})
    return community, env, loc


def _check_valid(s: Survey) -> None:
    values = s.community.to_numpy(dtype=float)
    assert np.all(np.isfinite(values)) and np.all(values >= 0)
    assert np.all(values.sum(axis=1) > 0)
    assert s.environment.index.equals(s.community.index)
    assert s.censored.shape == s.environment.shape
    assert not s.environment.isna().to_numpy().any()
    for col in s.environment.columns:
        dtype = s.environment[col].dtype
        assert dtype == np.float64 or isinstance(dtype, pd.CategoricalDtype)
    if s.locations is not None:
        assert s.locations.index.equals(s.community.index) and s.locations.crs is not None


def _survey_or_input_error(*args, **kwargs) -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a warning would be an unreported decision
        try:
            s = Survey(*args, **kwargs)
        except InputError:
            return
    _check_valid(s)


@SETTINGS
@given(frames(), st.one_of(st.none(), frames()), st.one_of(st.none(), frames()),
       st.sampled_from(["error", "drop-sites", "drop-variables"]),
       st.sampled_from(["error", "half-limit", "limit", "zero", "ros"]), st.booleans())
def test_random_frames(community, environment, locations, missing, censored, shared):
    _survey_or_input_error(community, environment, locations, missing=missing,
                           censored=censored, shared_sites_only=shared)


@SETTINGS
@given(plausible_frames(), st.sampled_from(["error", "drop-sites", "drop-variables"]),
       st.sampled_from(["error", "half-limit", "ros"]), st.sampled_from(["error", "drop"]))
def test_nearly_good_frames(tables, missing, censored, empty_sites):
    community, env, loc = tables
    _survey_or_input_error(community, env, loc, missing=missing, censored=censored,
                           empty_sites=empty_sites, constant="drop")


def _read(files: dict[str, bytes], **kwargs) -> None:
    with tempfile.TemporaryDirectory() as folder:
        paths = []
        for filename, data in files.items():
            path = Path(folder) / filename
            path.write_bytes(data)
            paths.append(path)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # GDAL may warn about junk it is handed
            try:
                s = read_survey(*paths, **kwargs)
            except InputError:
                return
        _check_valid(s)


text_cell = st.one_of(junk, st.text(alphabet=st.characters(codec="utf-8"), max_size=4))


@st.composite
def delimited_text(draw):
    delimiter = draw(st.sampled_from([",", ";", "\t", "|"]))
    n_cols = draw(st.integers(1, 4))
    lines = [delimiter.join(["site", *draw(st.lists(name, min_size=n_cols, max_size=n_cols))])]
    for _ in range(draw(st.integers(0, 5))):
        width = draw(st.integers(0, n_cols + 2))
        lines.append(delimiter.join(draw(st.lists(text_cell, min_size=width, max_size=width))))
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "utf-16", "latin-1"]))
    return "\n".join(lines).encode(encoding, errors="replace")


@SETTINGS
@given(delimited_text(), st.one_of(st.none(), delimited_text()),
       st.sampled_from(["half-limit", "error"]))
def test_random_text_files(community, environment, censored):
    files = {"community.csv": community}
    if environment is not None:
        files["environment.tsv"] = environment
    _read(files, censored=censored, missing="drop-sites")


@settings(max_examples=30, deadline=None)
@given(st.binary(max_size=300), st.sampled_from(["csv", "xlsx", "gpkg", "geojson", "txt"]),
       st.sampled_from([b"", b"PK\x03\x04", b"SQLite format 3\x00", b"\xff\xfe", b"{"]))
def test_random_bytes(data, ext, prefix):
    _read({f"community.{ext}": prefix + data})

