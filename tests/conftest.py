"""Shared fixtures: small real projects on disk with real DuckDB databases (no mocks)."""
from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

SMALL_CONFIG = """\
[jurisdiction]
name = "Test township"
valuation_date = 2025-01-01
sale_window_months = 24

[files]
parcels = "parcels.csv"
sales = "sales.csv"

[columns]
parcel_id = "pid"
segment = "nbhd"
market_area = "area"
property_class = "class"
prior_value = "prior"
sale_id = "sale_id"
sale_date = "date"
sale_price = "price"
sale_validity = "code"

[[features]]
name = "living_area"
column = "sqft"
type = "continuous"
log = true
range = [200, 8000]

[[features]]
name = "quality"
type = "ordinal"
levels = ["low", "average", "good"]

[[features]]
name = "garage"
type = "binary"
"""

SMALL_PARCELS = """\
pid,nbhd,area,class,prior,sqft,quality,garage
00101,north,A,single_family,150000,1200,average,1
00102,north,A,single_family,210000,1800,good,0
00103,south,A,single_family,99000,900,low,yes
00104,east,B,condominium,120000,750,average,no
00105,east,B,condominium,,800,good,1
"""

SMALL_SALES = """\
sale_id,pid,date,price,code
S1,00101,2024-03-01,180000,valid
S2,00102,2024-06-15,260000,valid
S3,00104,2023-11-30,140000,family
S4,00105,2024-09-01,155000,valid
S4,00103,2024-09-01,155000,valid
"""


def write_project(folder: Path, config: str = SMALL_CONFIG, parcels: str = SMALL_PARCELS,
                  sales: str = SMALL_SALES) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "reval.toml").write_text(textwrap.dedent(config), encoding="utf-8")
    (folder / "parcels.csv").write_text(parcels, encoding="utf-8")
    (folder / "sales.csv").write_text(sales, encoding="utf-8")
    return folder


@pytest.fixture
def small_project(tmp_path: Path) -> Path:
    return write_project(tmp_path / "proj")


@pytest.fixture(scope="session")
def demo_project(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The shipped demo municipality, imported, sales prepared and prior-value studies stored (built once;
    tests that change it must copy it first with `copy_project`)."""
    from reval.service.actions import build_demo

    folder = tmp_path_factory.mktemp("demo")
    build_demo(folder, None)
    return folder


def copy_project(source: Path, target: Path) -> Path:
    import shutil

    shutil.copytree(source, target)
    return target
