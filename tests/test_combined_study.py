"""`reval study --projects A B`: one ratio study across projects (issue 16), each project read only, by the same
statistics code as a project's own study."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from data_samples.demo_town import write_project
from helpers import database_content, query_frame, run_reval
from reval.service.actions import combined_study, import_data, prepare_sales, study
from reval.stats.study import ALL_PROJECTS


@pytest.fixture(scope="module")
def two_towns(tmp_path_factory: pytest.TempPathFactory) -> list[Path]:
    root = tmp_path_factory.mktemp("towns")
    folders = []
    for name, seed in (("east", 3), ("west", 4)):
        write_project(root / name, n_parcels=2_000, seed=seed)
        import_data(root / name)
        prepare_sales(root / name)
        folders.append(root / name)
    return folders


def _ratios(folder: Path) -> np.ndarray:
    # The study's sale rows (reval/stats/study.py sales_for_study, prior values): one qualified sale per row,
    # its parcels' summed prior values over its time-adjusted price.
    f = query_frame(folder, """SELECT sum(p.prior_value) / any_value(a.adjusted_price) AS ratio FROM adjusted_sales a
                               JOIN parcels p USING (parcel_id) GROUP BY a.sale_id""")
    return f["ratio"].to_numpy(float)


def test_a_combined_study_groups_each_project_and_all_together(two_towns: list[Path]) -> None:
    before = [database_content(f / "reval.duckdb") for f in two_towns]
    result = combined_study(two_towns)
    assert [database_content(f / "reval.duckdb") for f in two_towns] == before   # read only
    groups = {g["group"]: g for g in result["groups"]}
    assert list(groups) == ["east", "west", ALL_PROJECTS]
    # Each project's group is that project's own study of all its sales (same code, same settings) ...
    for folder in two_towns:
        own = study(folder, by="all")["groups"][0]
        mine = groups[folder.name]
        for key in ("n", "median_ratio", "cod", "prd", "prb"):
            assert mine[key] == own[key], key
    # ... and the combined group is the study of the union: its sales counted and its median ratio by numpy on
    # the raw ratios, after the demo config's IQR trim (k = 3, IAAO Standard on Ratio Studies 2013, from memory:
    # fences at Q1 - k*IQR and Q3 + k*IQR, linear-interpolated quartiles as numpy's default).
    union = np.concatenate([_ratios(f) for f in two_towns])
    combined = groups[ALL_PROJECTS]
    assert combined["n"] + combined["n_trimmed"] == union.size
    q1, q3 = np.percentile(union, [25, 75])
    kept = union[(union >= q1 - 3 * (q3 - q1)) & (union <= q3 + 3 * (q3 - q1))]
    assert combined["n"] == kept.size and combined["median_ratio"] == pytest.approx(np.median(kept), rel=1e-12)


def test_the_command_line_prints_the_combined_study(two_towns: list[Path]) -> None:
    out = run_reval("study", "--projects", *map(str, two_towns))
    assert out.returncode == 0, out.stderr
    assert "east" in out.stdout and "west" in out.stdout and ALL_PROJECTS in out.stdout
    bad = run_reval("study", "--projects", str(two_towns[0]), "--by", "market_area")
    assert bad.returncode == 1 and "takes no --by" in bad.stderr and "Traceback" not in bad.stderr
