"""reval.toml: every key declared once; every error names the file, the section and the key."""
from __future__ import annotations

import dataclasses
import os
import re
import shutil
import string
import tomllib
from pathlib import Path
from typing import get_args

import duckdb
import pytest

from helpers import ROOT, SMALL_CONFIG, run_reval, write_project
from reval.config_keys import Key, declared_keys
from reval.data.config import (DATE_DIRECTIVES, SECTIONS, AssessmentSettings, StudySettings, TimeSettings,
                               load_config)
from reval.data.config_doc import BEGIN, END, config_table
from reval.data.starter import starter_config
from reval.errors import ConfigError, UserError
from reval.model.settings import ModelSettings
from reval.service.actions import init_project
from reval.stats.standards import Standards


def _refused(folder: Path) -> ConfigError:
    with pytest.raises(ConfigError) as caught:
        load_config(folder)
    return caught.value


def test_small_config_loads(small_project: Path) -> None:
    config = load_config(small_project)
    assert config.jurisdiction == "Test township"
    assert [f.name for f in config.features] == ["living_area", "quality", "garage"]
    assert config.features[0].column == "sqft" and config.features[1].column == "quality"   # default: the name
    assert config.features[1].levels == ("low", "average", "good")
    assert config.columns["segment"] == "nbhd" and "latitude" not in config.columns
    assert str(config.sale_window_start) == "2023-01-01"


def test_shape_rules_and_the_loss_are_read(tmp_path: Path) -> None:
    config = SMALL_CONFIG.replace("range = [200, 8000]", 'range = [200, 8000]\nshape = "increasing"', 1)
    config = config.replace('levels = ["low", "average", "good"]', 'levels = ["low", "average", "good"]\nshape = "decreasing"')
    loaded = load_config(write_project(tmp_path / "p", config=config + '\n[model]\nloss = "squared"\nhuber_k = 2\n'))
    assert [f.shape for f in loaded.features] == ["increasing", "decreasing", "free"]
    assert loaded.model.loss == "squared" and loaded.model.huber_k == 2.0
    assert load_config(write_project(tmp_path / "q")).model.loss == "auto"  # the default: chosen by evidence


@pytest.mark.parametrize("old,new,key,fragment", [
    ('name = "Test township"', 'name = "T"\ncolour = "blue"', "jurisdiction.colour", "unknown key"),
    ('segment = "nbhd"\n', "", "columns.segment", "missing"),
    ('segment = "nbhd"\n', 'segment = "  "\n', "columns.segment", "expected a column name"),
    ('sale_price = "price"\n', "", "columns.sale_price", "missing"),
    ('type = "ordinal"', 'type = "ranked"', "features[1].type", "must be one of"),
    ('levels = ["low", "average", "good"]', "", "features[1].levels", "needs its levels"),
    ('name = "quality"', 'name = "Quality"', "features[1].name", "lower case"),
    ('type = "ordinal"', 'type = "ordinal"\nunit = "grade"', "features[1].unit", "only continuous"),
    ('range = [200, 8000]', 'range = [200, 8000]\nunit = "sq ft\\nx"', "features[0].unit", "no control characters"),
    ('name = "garage"', 'name = "quality"', "features", "declared twice"),
    ("valuation_date = 2025-01-01", 'valuation_date = "soon"', "jurisdiction.valuation_date", "expected a date"),
    ("valuation_date = 2025-01-01", "valuation_date = 0001-01-01", "jurisdiction.valuation_date", "between 1900"),
    ("sale_window_months = 24", "sale_window_months = -3", "jurisdiction.sale_window_months", "between 1 and 600"),
    ('parcels = "parcels.csv"', 'parcels = "nowhere.csv"', "files.parcels", "file not found"),
    ('parcels = "parcels.csv"', 'parcels = "parcels.xlsx"', "files.parcels", ".csv or .parquet"),
    ("[columns]", "[colums]", "(top level).colums", "unknown key"),
    ("range = [200, 8000]", "range = [8000, 200]", "features[0].range", "low <= high"),
    ("range = [200, 8000]", "range = [200, inf]", "features[0].range", "finite"),
    ("range = [200, 8000]", 'range = [200, 8000]\nshape = "rising"', "features[0].shape", "must be one of"),
    ('type = "binary"', 'type = "binary"\nshape = "increasing"', "features[2].shape", "only continuous and ordinal"),
])
def test_config_errors_name_file_and_key(tmp_path: Path, old: str, new: str, key: str, fragment: str) -> None:
    assert old in SMALL_CONFIG
    error = _refused(write_project(tmp_path / "p", config=SMALL_CONFIG.replace(old, new, 1)))
    assert error.key == key
    assert fragment in str(error)
    assert str(tmp_path / "p" / "reval.toml") in str(error)


# Each case quoted in issues 11 and 17 (accepted, or a traceback later, before the keys were declared),
# then the other bounds: the key named with its section, the file named.
BOUNDS = [
    ("[study]\nbootstrap = 0", "study.bootstrap", "between 100 and 100000, got 0"),
    ('[files]\ndate_format = "%Q-%m"', "files.date_format", "unknown directive %Q"),
    ("[jurisdiction]\nsale_window_months = 100000", "jurisdiction.sale_window_months", "between 1 and 600"),
    ("[study]\ntrim_iqr_k = nan", "study.trim_iqr_k", "must be a finite number, got nan"),
    ("[assessment]\nlevel = nan", "assessment.level", "must be a finite number, got nan"),
    ("[assessment]\nrounding = -100", "assessment.rounding", "between 0 and 10000, got -100.0"),
    ("[assessment]\nreview_change_threshold = -0.5", "assessment.review_change_threshold", "at least 0, got -0.5"),
    ('[files]\ndate_format = "%d/%m"', "files.date_format", "names no year"),
    ('[files]\ndate_format = "%Y-%m-%"', "files.date_format", "unknown directive %"),
    ("[assessment]\nlevel = 0", "assessment.level", "greater than 0 and at most 1"),
    ("[assessment]\nlevel = inf", "assessment.level", "finite"),
    ("[assessment]\nrounding = 1e9", "assessment.rounding", "between 0 and 10000"),
    ("[[assessment.caps]]\nmax_increase = -0.1", "assessment.caps[0].max_increase", "at least 0"),
    ("[[assessment.caps]]\nmax_increase = nan", "assessment.caps[0].max_increase", "finite"),
    ('[[assessment.caps]]\nproperty_classes = "x"\nmax_increase = 0.1', "assessment.caps[0].property_classes",
     "expected a list of text"),
    ("[[assessment.caps]]\nproperty_classes = []", "assessment.caps[0].max_increase", "a cap needs max_increase"),
    ("[[assessment.caps]]\nmax_increase = 0.1\nlimit = 2", "assessment.caps[0].limit", "unknown key"),
    ("[study]\nconfidence = 1", "study.confidence", "greater than 0.5 and less than 1"),
    ("[study]\nseed = -1", "study.seed", "at least 0"),
    ("[study]\nbootstrap = 1e9", "study.bootstrap", "expected a whole number, got a number"),
    ("[time_adjustment]\nn_basis = 100000", "time_adjustment.n_basis", "between 4 and 100"),
    ("[time_adjustment]\nmin_sales_market_area = 0", "time_adjustment.min_sales_market_area", "at least 1"),
    ("[sales]\nprice_min = -5", "sales.price_min", "at least 0"),
    ("[sales]\nprice_min = 9\nprice_max = 5", "sales.price_min", "above sales.price_max"),
    ("[sales]\nexclude_multi_parcel = 1", "sales.exclude_multi_parcel", "expected true or false"),
    ("[model]\nalpha = 1.5", "model.alpha", "must be greater than 0 and less than 1, got 1.5"),
    ("[model]\nfolds = 1", "model.folds", "between 2 and 100, got 1"),
    ("[model]\njobs = 100000", "model.jobs", "between 1 and 256"),
    ("[model]\nseed = -3", "model.seed", "at least 0"),
    ('[model]\ninteraction_rule = "ridge"', "model.interaction_rule", 'one of "lasso"'),
    ('[model]\ninteraction_candidates = [["a", "a"]]', "model.interaction_candidates", "pairs"),
    ("[model]\ncolour = 1", "model.colour", "unknown key"),
    ('[model]\nloss = "absolute"', "model.loss", 'one of "auto", "huber"'),
    ('[model]\nlocation_surface = ["latitude"]', "model.location_surface", "two different feature names"),
    ('[model]\nlocation_surface = ["x", "x"]', "model.location_surface", "two different feature names"),
    ("[model]\nhuber_k = 0", "model.huber_k", "greater than 0"),
    ("[standards]\ncod_limit = 3", "standards.cod_limit", "unknown key"),
    ("[standards]\nprd = [1.03, 0.98]", "standards.prd", "low <= high"),
    ("[standards]\nmedian_ratio = [0.9, inf]", "standards.median_ratio", "finite"),
    ("[standards.cod_max]\nincome = -1", "standards.cod_max.income", "greater than 0"),
    ("[standards.cod_max]\nincome = nan", "standards.cod_max.income", "finite"),
    ("[standards]\nmin_sales = 0", "standards.min_sales", "at least 1"),
    ('[study]\nbootstrap = "1000"', "study.bootstrap", "expected a whole number, got text"),
]


def _with(case: str) -> str:
    """SMALL_CONFIG with the case's lines set in its section (the first line), replacing a key it already has."""
    header, _, lines = case.partition("\n")
    if header.startswith("[[") or header not in SMALL_CONFIG:
        return SMALL_CONFIG + "\n" + case + "\n"
    before, _, after = SMALL_CONFIG.partition(header + "\n")
    body, bracket, rest = after.partition("\n[")
    for line in lines.splitlines():
        name = line.split("=")[0].strip()
        body, found = re.subn(rf"^{name} = .*$", line, body, flags=re.M)
        body = body if found else f"{line}\n{body}"
    return before + header + "\n" + body + bracket + rest


@pytest.mark.parametrize("lines,key,fragment", BOUNDS)
def test_every_bound_is_checked_at_load_naming_section_and_key(tmp_path: Path, lines: str, key: str,
                                                               fragment: str) -> None:
    text = _with(lines)
    tomllib.loads(text)   # the case is valid TOML: the refusal comes from the declared bounds
    error = _refused(write_project(tmp_path / "p", config=text))
    assert (error.key, error.section) == (key, key.split(".")[0].split("[")[0])
    assert fragment in error.problem, str(error)
    assert str(error).startswith(f"{tmp_path / 'p' / 'reval.toml'}: key '{key}': ")


@pytest.mark.parametrize("lines,key,command", [
    ("[study]\nbootstrap = 0", "study.bootstrap", "study"),                  # issue 11: study crashed
    ('[files]\ndate_format = "%Q-%m"', "files.date_format", "import"),        # issue 17: import traceback
    ("[jurisdiction]\nsale_window_months = 100000", "jurisdiction.sale_window_months", "sales"),  # sales crashed
    ("[study]\ntrim_iqr_k = nan", "study.trim_iqr_k", "study"),               # study crashed
    ("[assessment]\nlevel = nan", "assessment.level", "import"),              # accepted, NaN values approved
    ("[assessment]\nrounding = -100", "assessment.rounding", "import"),       # accepted
    ("[assessment]\nreview_change_threshold = -0.5", "assessment.review_change_threshold", "import"),  # accepted
])
def test_the_command_line_refuses_each_quoted_case_with_a_message(tmp_path: Path, lines: str, key: str,
                                                                  command: str) -> None:
    folder = write_project(tmp_path / "p", config=_with(lines))
    done = run_reval(command, "--project", str(folder))
    assert done.returncode == 1, done.stderr
    assert f"reval.toml: key '{key}': " in done.stderr and "Traceback" not in done.stderr


def test_a_late_byte_that_is_not_utf8_is_refused_naming_line_and_column(tmp_path: Path) -> None:
    folder = write_project(tmp_path / "p", config=SMALL_CONFIG + '\n[sales]\nvalidity_codes_kept = ["caf\xe9"]\n')
    path = folder / "reval.toml"
    path.write_bytes(path.read_bytes().replace("caf\xe9".encode(), b"caf\xe9"))   # Latin-1, not UTF-8
    line = SMALL_CONFIG.count("\n") + 3
    error = _refused(folder)
    assert f"line {line}, column 28: not UTF-8 text (byte 0xe9)" in str(error) and error.file == str(path)
    done = run_reval("import", "--project", str(folder))
    assert done.returncode == 1 and f"line {line}, column 28" in done.stderr and "Traceback" not in done.stderr


def test_toml_syntax_errors_name_line_and_column(tmp_path: Path) -> None:
    error = _refused(write_project(tmp_path / "p", config=SMALL_CONFIG + "\n[study]\nbootstrap = = 3\n"))
    assert "not valid TOML" in str(error) and f"line {SMALL_CONFIG.count(chr(10)) + 3}" in str(error)


def test_date_directives_match_what_duckdb_reads() -> None:
    # Reference: DuckDB itself (the import parses sale dates with its try_strptime): a directive is in
    # DATE_DIRECTIVES exactly when DuckDB accepts it.
    con = duckdb.connect()
    for directive in [c for c in string.ascii_letters] + [f"-{c}" for c in string.ascii_letters]:
        try:
            con.execute("SELECT try_strptime('2020', ?)", [f"%{directive}"]).fetchone()
            accepted = True
        except duckdb.Error:
            accepted = False
        assert accepted == (directive in DATE_DIRECTIVES), directive


# ---- one declaration: defaults, numeric bounds, the starter and the README -------------------------------

def _numeric_keys() -> list[tuple[str, Key]]:
    keys = [(s.name, k) for s in SECTIONS for k in declared_keys(s.cls)]
    keys += [("assessment.caps[0]", k) for k in declared_keys(AssessmentSettings.__dataclass_fields__["caps"]
                                                                .metadata["setting"].items)]
    return [(where, k) for where, k in keys if {int, float} & set(get_args(k.hint) or (k.hint,))]


def test_every_numeric_key_declares_a_bound() -> None:
    # Sign at least: a new key added without bounds fails here.
    keys = _numeric_keys()
    assert len(keys) >= 25
    missing = [f"{where}.{k.name}" for where, k in keys if k.spec.lo is None and k.spec.hi is None]
    assert missing == []


@pytest.mark.parametrize("where,name", [(w, k.name) for w, k in _numeric_keys()])
def test_every_numeric_key_refuses_nan_infinity_and_a_value_beyond_its_bound(tmp_path: Path, where: str,
                                                                             name: str) -> None:
    key = next(k for w, k in _numeric_keys() if (w, k.name) == (where, name))
    header = "[[assessment.caps]]" if where.startswith("assessment.caps") else f"[{where}]"
    other = "max_increase = 0.1\n" if header == "[[assessment.caps]]" and name != "max_increase" else ""
    beyond = key.spec.lo - 1 if key.spec.lo is not None else key.spec.hi + 1
    table = get_args(key.hint)[:1] == (str,)   # a table of name = number: the entry is named
    for value in ("nan", "inf", "-inf", repr(beyond)):
        toml = f"{{ farm = {value} }}" if table else f"[{value}, {value}]" if key.hint == tuple[float, float] else value
        error = _refused(write_project(tmp_path / value, config=_with(f"{header}\n{other}{name} = {toml}")))
        assert error.key == f"{where}.{name}" + (".farm" if table else ""), (value, str(error))


def test_the_starter_is_valid_and_its_defaults_are_the_declared_ones(tmp_path: Path) -> None:
    path = init_project(tmp_path / "new", "Borough")
    text = path.read_text(encoding="utf-8")
    assert "qualified assessor" in text and "local law" in text
    # The starter names files that do not exist yet: loading says which key points where.
    assert _refused(path).key == "files.parcels"
    (tmp_path / "new" / "parcels.csv").write_text("parcel_id\n")
    (tmp_path / "new" / "sales.csv").write_text("sale_id\n")
    config = load_config(path)
    assert config.jurisdiction == "Borough" and [f.name for f in config.features] == ["living_area", "quality"]
    assert (config.time, config.study, config.model, config.assessment) == (
        TimeSettings(), StudySettings(), ModelSettings(), AssessmentSettings())
    assert config.standards == Standards() and config.sale_window_months == 36


def test_every_key_is_in_the_starter_and_each_example_is_valid(tmp_path: Path) -> None:
    text = starter_config("Borough")
    for section in SECTIONS:
        for key in declared_keys(section.cls):
            line = rf"^(# |#   )?{key.name} |^\[{section.name}\.{key.name}\]|^# \[\[{section.name}\.{key.name}\]\]"
            assert re.search(line, text, re.M), f"{section.name}.{key.name}"
    # Uncommenting every commented key (and the caps table) still gives a valid config.
    uncommented = re.sub(r"^# (\[\[assessment.caps\]\]|[a-z_]+ = )", r"\1", text, flags=re.M)
    assert uncommented.count("\n# ") < text.count("\n# ")
    folder = tmp_path / "p"
    folder.mkdir()
    (folder / "parcels.csv").write_text("parcel_id\n")
    (folder / "sales.csv").write_text("sale_id\n")
    (folder / "reval.toml").write_text(uncommented, encoding="utf-8")
    config = load_config(folder)
    assert config.date_format == "%d/%m/%Y" and config.study.trim_iqr_k == 3.0
    assert config.assessment.caps == ({"property_classes": ["single_family"], "max_increase": 0.1, "max_decrease": 0.1,
                                       "exclude_new_construction": True, "reset_on_sale": True},)
    assert config.columns["latitude"] == "latitude"


def test_the_readme_table_is_the_generated_one() -> None:
    # Regenerate with: python -m reval.data.config_doc --write README.md
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    table = readme.split(BEGIN + "\n", 1)[1].split(END, 1)[0]
    assert table == config_table()
    for section in SECTIONS:
        for key in declared_keys(section.cls):
            assert f"`{section.name}{'[]' if section.array else ''}.{key.name}`" in table


def test_shipped_configs_are_valid(tmp_path: Path) -> None:
    assert load_config(ROOT / "data_samples" / "demo").study.trim_iqr_k == 3.0
    ames = tmp_path / "ames"
    ames.mkdir()
    shutil.copy(ROOT / "data_samples" / "ames" / "reval.toml", ames)
    (ames / "ames.csv").write_text("parcel_id\n")   # written by data_samples.ames_data; only its name matters here
    assert len(load_config(ames).features) == 14


def test_settings_built_in_code_are_checked_by_the_same_declaration() -> None:
    with pytest.raises(ValueError, match="key 'folds': must be between 2 and 100, got 1"):
        ModelSettings(folds=1)
    with pytest.raises(ValueError, match="key 'jobs'"):
        dataclasses.replace(ModelSettings(), jobs=0)
    assert AssessmentSettings(rounding=50).rounding == 50.0 and isinstance(AssessmentSettings(rounding=50).rounding, float)


# ---- reval init ---------------------------------------------------------------------------------------------

NAMES = ['Borough of "Quoted"', "back\\slash \\n \\u0041", "two\nlines\r\nand\ttab", "'''\"\"\" [x] # not a comment",
         "".join(chr(c) for c in range(0x300)), "Zürich – 東京 🏠", ""]


@pytest.mark.parametrize("name", NAMES, ids=range(len(NAMES)))
def test_init_writes_valid_toml_for_any_name(tmp_path: Path, name: str) -> None:
    path = init_project(tmp_path / "new", name)
    assert tomllib.loads(path.read_text(encoding="utf-8"))["jurisdiction"]["name"] == name
    (tmp_path / "new" / "parcels.csv").write_text("parcel_id\n")
    (tmp_path / "new" / "sales.csv").write_text("sale_id\n")
    assert load_config(path).jurisdiction == name


def test_init_through_the_command_line_round_trips_a_name_with_a_newline(tmp_path: Path) -> None:
    done = run_reval("init", str(tmp_path / "p"), "--name", 'North\n"Ward" \\ 7')
    assert done.returncode == 0, done.stderr
    assert tomllib.loads((tmp_path / "p" / "reval.toml").read_text())["jurisdiction"]["name"] == 'North\n"Ward" \\ 7'


def test_init_refuses_to_overwrite_or_write_where_it_cannot(tmp_path: Path) -> None:
    path = init_project(tmp_path / "new", "First")
    with pytest.raises(UserError, match="already exists"):
        init_project(tmp_path / "new", "again")
    assert "First" in path.read_text()
    a_file = tmp_path / "notes.txt"
    a_file.write_text("keep me")
    cases = {str(tmp_path / "new"): "already exists", str(a_file): "is a file, not a folder",
             str(a_file / "sub"): "Cannot write"}
    for folder, fragment in cases.items():
        done = run_reval("init", folder)
        assert done.returncode == 1 and fragment in done.stderr and "Traceback" not in done.stderr, done.stderr
    assert a_file.read_text() == "keep me" and "First" in path.read_text()


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into read-only folders")
def test_init_into_a_read_only_folder_is_a_message(tmp_path: Path) -> None:
    locked = tmp_path / "locked"
    locked.mkdir(mode=0o555)
    done = run_reval("init", str(locked / "p"))
    assert done.returncode == 1 and "Cannot write" in done.stderr and "Traceback" not in done.stderr


def test_init_refuses_a_name_that_is_not_text(tmp_path: Path) -> None:
    # Bytes that are not UTF-8 reach Python as lone surrogates, which no TOML (or UTF-8) file can hold.
    done = run_reval("init", str(tmp_path / "p"), "--name", b"caf\xe9")
    assert done.returncode == 1 and "jurisdiction name" in done.stderr and "Traceback" not in done.stderr
    assert not (tmp_path / "p" / "reval.toml").exists()


def test_the_location_surface_must_name_two_declared_continuous_features(tmp_path: Path) -> None:
    error = _refused(write_project(tmp_path / "p", config=SMALL_CONFIG + '\n[model]\nlocation_surface = ["living_area", "garage"]\n'))
    assert error.key == "model.location_surface" and "'garage' is not a declared continuous feature" in error.problem
