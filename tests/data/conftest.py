"""Small tables shared by the data-stage tests."""

from __future__ import annotations

import pandas as pd
import pytest


@pytest.fixture
def community() -> pd.DataFrame:
    return pd.DataFrame({
        "site": ["S1", "S2", "S3", "S4"],
        "Alpha": [3, 0, 1, 7],
        "Beta": [0, 5, 2, 1],
        "Gamma": [1, 1, 0, 0],
    })


@pytest.fixture
def environment() -> pd.DataFrame:
    return pd.DataFrame({
        "site": ["S1", "S2", "S3", "S4"],
        "Cu": [12.5, 40.0, 7.25, 19.0],
        "pH": [6.1, 7.2, 6.8, 5.9],
        "habitat": ["pool", "riffle", "pool", "margin"],
    })


@pytest.fixture
def lonlat() -> pd.DataFrame:
    return pd.DataFrame({
        "site": ["S1", "S2", "S3", "S4"],
        "longitude": [9.1, 9.2, 9.3, 9.4],
        "latitude": [61.0, 61.1, 61.2, 61.3],
    })

