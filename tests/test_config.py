"""forebrief.toml: every key parses, every bad key or value is a ConfigError naming the key.

The rules checked here are the contract of the weekly run (the configuration section of the
README): the file is read with tomllib, unknown sections and keys are refused, paths are
relative to the file's folder, and command-line flags override the file. TOML syntax itself
follows the TOML 1.0.0 specification (toml.io), which tomllib implements.
"""

from __future__ import annotations

import json
import re
import textwrap
from pathlib import Path

import pytest

from forebrief.app.config import (
    BriefingConfig,
    EmailConfig,
    QuantityInfo,
    RegionInfo,
    Threshold,
    load_config,
    parse_config,
)
from forebrief.cli import main
from forebrief.demo import generate_scenario, write_scenario
from forebrief.errors import ConfigError

# WeasyPrint 70 opens its sRGB profile (weasyprint/pdf/__init__.py, the 'srgb' output intent)
# and never closes it; the record's PDF is rendered in the command-line tests below.
WEASYPRINT_ICC_LEAK = (
    r"ignore:Exception ignored in. <_io\.FileIO name='[^']*sRGB2014\.icc'"
    ":pytest.PytestUnraisableExceptionWarning"
)

README = Path(__file__).resolve().parents[1] / "README.md"

FULL = """
[briefing]
title = "Weekly outlook for Ashvale"
audience = "Regional health board"
jurisdiction = "Ashvale"
contact = "Forecast desk, room 4"
paper = "letter"
templates_dir = "my-templates"

[inputs]
forecasts = ["subs/a", "subs/b"]
observations = "data/observed.csv"
columns = { value = "quantile_value", level = "prob" }

[archive]
folder = "records"

[scoring]
window = 10
alpha = 0.2
levels = [0.1, 0.5, 0.9]
overshoot = 0.2
min_items = 4
power = 0.5
background = "log"
baseline = "flatline"
horizons = [3, 1, 2, 1]
backtest_weeks = 8

[jurisdiction]
total_region = "ashvale"

[regions.ashvale]
name = "Ashvale (whole area)"
population = 500000
thresholds.cases = { value = 900, label = "surge line" }

[regions.north-moor]
name = "North Moor"
population = 120000
thresholds.cases = 250

[quantities.cases]
name = "Cases"
unit = "cases per week"

[quantities.net-change]
name = "Net change"
unit = "beds"
signed = true

[email]
from = "desk@example.org"
to = ["board@example.org", "chair@example.org"]
cc = "archive@example.org"
subject = "{title} - {issued}"
smtp_host = "mail.example.org"
smtp_port = 465
security = "ssl"
user = "desk"
password_env = "ASHVALE_SMTP_PASSWORD"
"""


def _write(folder: Path, text: str, name: str = "forebrief.toml") -> Path:
    path = folder / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def test_every_section_and_key_parses(tmp_path: Path) -> None:
    cfg = load_config(_write(tmp_path, FULL))
    base = tmp_path.resolve()
    assert cfg.source == base / "forebrief.toml"
    assert (cfg.title, cfg.audience, cfg.jurisdiction, cfg.contact, cfg.paper) == (
        "Weekly outlook for Ashvale",
        "Regional health board",
        "Ashvale",
        "Forecast desk, room 4",
        "letter",
    )
    assert cfg.templates_dir == base / "my-templates"
    assert cfg.forecasts == (base / "subs/a", base / "subs/b")
    assert cfg.observations == (base / "data/observed.csv",)
    # stored as {theirs: ours}, the direction a reader renames columns in
    assert dict(cfg.columns) == {"quantile_value": "value", "prob": "level"}
    assert cfg.archive == base / "records"
    assert (cfg.window, cfg.alpha, cfg.levels, cfg.overshoot, cfg.min_items, cfg.power) == (
        10,
        0.2,
        (0.1, 0.5, 0.9),
        0.2,
        4,
        0.5,
    )
    assert (cfg.background, cfg.baseline, cfg.backtest_weeks) == ("log", "flatline", 8)
    assert cfg.horizons == (1, 2, 3)  # sorted, duplicates dropped
    assert cfg.total_region == "ashvale"
    assert dict(cfg.regions) == {
        "ashvale": RegionInfo("ashvale", "Ashvale (whole area)", 500000.0),
        "north-moor": RegionInfo("north-moor", "North Moor", 120000.0),
    }
    assert set(cfg.thresholds) == {
        Threshold("ashvale", "cases", 900.0, "surge line"),
        Threshold("north-moor", "cases", 250.0, "alert threshold"),
    }
    assert dict(cfg.quantities) == {
        "cases": QuantityInfo("cases", "Cases", "cases per week", False),
        "net-change": QuantityInfo("net-change", "Net change", "beds", True),
    }
    assert cfg.signed == ("net-change",)
    assert cfg.email == EmailConfig(
        sender="desk@example.org",
        to=("board@example.org", "chair@example.org"),
        cc=("archive@example.org",),
        subject="{title} - {issued}",
        smtp_host="mail.example.org",
        smtp_port=465,
        security="ssl",
        user="desk",
        password_env="ASHVALE_SMTP_PASSWORD",
    )


def test_the_effective_configuration_holds_no_password_setting(tmp_path: Path) -> None:
    plain = load_config(_write(tmp_path, FULL)).as_dict()
    assert "password_env" not in plain["email"]
    json.dumps(plain)  # plain data, ready for the manifest
    assert plain["forecasts"] == [
        str(tmp_path.resolve() / "subs/a"),
        str(tmp_path.resolve() / "subs/b"),
    ]


def test_an_empty_file_gives_the_documented_defaults(tmp_path: Path) -> None:
    cfg = load_config(_write(tmp_path, ""))
    defaults = BriefingConfig()
    # the default archive sits beside the configuration file (README, [archive] folder);
    # without a file it is ./archive
    assert cfg.archive == _write(tmp_path, "").parent.resolve() / "archive"
    assert defaults.archive == Path("archive")
    for name in (
        "title",
        "audience",
        "jurisdiction",
        "contact",
        "paper",
        "window",
        "alpha",
        "levels",
        "overshoot",
        "min_items",
        "power",
        "background",
        "baseline",
        "horizons",
        "backtest_weeks",
        "total_region",
    ):
        assert getattr(cfg, name) == getattr(defaults, name), name
    assert (defaults.window, defaults.alpha, defaults.levels, defaults.horizons) == (
        12,
        "auto",
        (0.05, 0.25, 0.5, 0.75, 0.95),
        (1, 2, 3, 4),
    )  # README defaults table


def test_every_key_is_documented_in_the_readme() -> None:
    text = README.read_text(encoding="utf-8")
    section = text.split("## Configuration", 1)[1].split("\n## ", 1)[0]
    keys = {
        "briefing": ["title", "audience", "jurisdiction", "contact", "paper", "templates_dir"],
        "inputs": ["forecasts", "observations", "columns"],
        "archive": ["folder"],
        "scoring": [
            "window",
            "alpha",
            "levels",
            "overshoot",
            "min_items",
            "power",
            "background",
            "baseline",
            "horizons",
            "backtest_weeks",
        ],
        "jurisdiction": ["total_region"],
        "regions.<id>": ["name", "population", "thresholds"],
        "quantities.<id>": ["name", "unit", "signed"],
        "email": [
            "from",
            "to",
            "cc",
            "subject",
            "smtp_host",
            "smtp_port",
            "security",
            "user",
            "password_env",
        ],
    }
    for sec, names in keys.items():
        rows = [line for line in section.splitlines() if line.startswith(f"| `[{sec}]")]
        assert rows, f"[{sec}] is not in the README's configuration table"
        # first cell, e.g. "`[regions.<id>] name`, `population`" -> name, population
        cells = [row.split("|")[1].replace("`", "").split("]", 1)[1] for row in rows]
        documented = {w for cell in cells for w in re.findall(r"[a-z_]+", cell)}
        for name in names:
            assert name in documented, f"[{sec}] {name} is undocumented"


def test_paths_are_relative_to_the_files_folder(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    folder = tmp_path / "deep" / "conf"
    folder.mkdir(parents=True)
    absolute = tmp_path / "elsewhere.csv"
    path = _write(
        folder,
        f"""
        [inputs]
        forecasts = "subs"
        observations = ["obs.csv", "{absolute.as_posix()}"]
        [archive]
        folder = "../records"
        [briefing]
        templates_dir = "tpl"
        """,
    )
    elsewhere = tmp_path / "cwd"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)  # the run's working folder must not matter
    cfg = load_config(Path("..") / "deep" / "conf" / "forebrief.toml")
    base = folder.resolve()
    assert cfg.forecasts == (base / "subs",)
    assert cfg.observations == (base / "obs.csv", absolute)
    assert cfg.archive.resolve() == (tmp_path / "deep" / "records").resolve()
    assert cfg.templates_dir == base / "tpl"
    assert load_config(path).forecasts == cfg.forecasts


# (TOML text, the key the message must name)
BAD = [
    pytest.param("[colours]\nx = 1\n", "colours", id="unknown section"),
    pytest.param("briefing = 3\n", "briefing", id="section not a table"),
    pytest.param("[briefing]\ncolour = 'red'\n", "briefing.colour", id="unknown key"),
    pytest.param("[scoring]\nwindow = 'twelve'\n", "scoring.window", id="window wrong type"),
    pytest.param("[scoring]\nwindow = 1.5\n", "scoring.window", id="window not whole"),
    pytest.param("[scoring]\nwindow = true\n", "scoring.window", id="window boolean"),
    pytest.param("[briefing]\ntitle = 3\n", "briefing.title", id="title wrong type"),
    pytest.param("[briefing]\ntitle = ''\n", "briefing.title", id="title empty"),
    pytest.param("[scoring]\nalpha = 2\n", "scoring.alpha", id="alpha 2"),
    pytest.param("[scoring]\nalpha = -0.1\n", "scoring.alpha", id="alpha negative"),
    pytest.param(
        "[scoring]\nlevels = [0.5, 0.25, 0.75]\n", "scoring.levels", id="levels not increasing"
    ),
    pytest.param("[scoring]\nlevels = [0.25, 0.25]\n", "scoring.levels", id="levels tied"),
    pytest.param("[scoring]\nlevels = [0.0, 0.5]\n", "scoring.levels", id="level at 0"),
    pytest.param("[scoring]\nlevels = 0.5\n", "scoring.levels", id="levels not a list"),
    pytest.param("[scoring]\npower = 0\n", "scoring.power", id="power 0"),
    pytest.param("[scoring]\npower = 1.5\n", "scoring.power", id="power above 1"),
    pytest.param("[scoring]\novershoot = -1\n", "scoring.overshoot", id="overshoot negative"),
    pytest.param("[scoring]\nmin_items = -1\n", "scoring.min_items", id="min_items negative"),
    pytest.param(
        "[scoring]\nbackground = 'logarithmic'\n", "scoring.background", id="background choice"
    ),
    pytest.param("[scoring]\nhorizons = [0, 1]\n", "scoring.horizons", id="horizon 0"),
    pytest.param("[scoring]\nhorizons = []\n", "scoring.horizons", id="horizons empty"),
    pytest.param(
        "[scoring]\nbacktest_weeks = 0\n", "scoring.backtest_weeks", id="backtest_weeks 0"
    ),
    pytest.param("[briefing]\npaper = 'A5'\n", "briefing.paper", id="paper A5"),
    pytest.param("[inputs]\nforecasts = 5\n", "inputs.forecasts", id="forecasts wrong type"),
    pytest.param("[inputs]\ncolumns = 5\n", "inputs.columns", id="columns wrong type"),
    pytest.param(
        "[jurisdiction]\ntotal_region = 'everywhere'\n[regions.north]\nname = 'N'\n",
        "jurisdiction.total_region",
        id="total_region unknown",
    ),
    pytest.param(
        "[regions.north]\npopulation = 'many'\n",
        "regions.north.population",
        id="population wrong type",
    ),
    pytest.param(
        "[regions.north]\npopulation = 0\n", "regions.north.population", id="population 0"
    ),
    pytest.param(
        "[regions.north]\nshape = 'round'\n", "regions.north.shape", id="region unknown key"
    ),
    pytest.param(
        "[regions.north]\nthresholds.cases = 'high'\n",
        "regions.north.thresholds.cases",
        id="threshold wrong type",
    ),
    pytest.param(
        "[regions.north]\nthresholds.cases = { label = 'x' }\n",
        "regions.north.thresholds.cases.value",
        id="threshold without value",
    ),
    pytest.param("regions = 3\n", "regions", id="regions not a table"),
    pytest.param(
        "[quantities.cases]\nsigned = 'yes'\n", "quantities.cases.signed", id="signed wrong type"
    ),
    pytest.param(
        "[quantities.cases]\ncolour = 'red'\n", "quantities.cases.colour", id="quantity unknown key"
    ),
    pytest.param("[email]\nsmtp_port = 70000\n", "email.smtp_port", id="port out of range"),
    pytest.param("[email]\nsecurity = 'tls'\n", "email.security", id="security choice"),
    pytest.param("[email]\nto = [5]\n", "email.to", id="address wrong type"),
    pytest.param("[email]\nreply_to = 'x@example.org'\n", "email.reply_to", id="email unknown key"),
]


@pytest.mark.parametrize(("text", "key"), BAD)
def test_a_bad_key_or_value_is_an_error_naming_the_key(tmp_path: Path, text: str, key: str) -> None:
    path = _write(tmp_path, text)
    with pytest.raises(ConfigError) as info:
        load_config(path)
    message = str(info.value)
    assert f"'{key}'" in message
    assert str(path.resolve()) in message  # names the file
    assert "fix:" in message


@pytest.mark.parametrize(
    ("text", "key", "choices"),
    [
        ("[briefing]\npaper = 'A5'\n", "briefing.paper", ["'A4'", "'letter'"]),
        ("[scoring]\nbackground = 'logarithmic'\n", "scoring.background", ["'uniform'", "'log'"]),
        ("[email]\nsecurity = 'tls'\n", "email.security", ["'starttls'", "'ssl'", "'none'"]),
    ],
)
def test_a_bad_choice_lists_the_valid_ones(
    tmp_path: Path, text: str, key: str, choices: list[str]
) -> None:
    with pytest.raises(ConfigError, match=re.escape(f"'{key}'")) as info:
        load_config(_write(tmp_path, text))
    for choice in choices:
        assert choice in str(info.value)


def test_bad_toml_syntax_names_the_file_and_line(tmp_path: Path) -> None:
    path = _write(tmp_path, '[briefing]\ntitle = "unclosed\n')
    with pytest.raises(ConfigError) as info:
        load_config(path)
    message = str(info.value)
    assert message.startswith(str(path))
    assert "not valid TOML" in message
    assert "line 2" in message
    assert "fix:" in message


def test_a_missing_file_is_a_clear_error(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match="no such configuration file"):
        load_config(tmp_path / "absent.toml")


# Once bugs (a number for thresholds raised AttributeError; unknown threshold keys and
# nan/inf passed): kept as regression tests.


def test_thresholds_that_are_not_a_table_are_an_error(tmp_path: Path) -> None:
    with pytest.raises(ConfigError, match=re.escape("'regions.north.thresholds'")):
        load_config(_write(tmp_path, "[regions.north]\nthresholds = 5\n"))


def test_an_unknown_key_in_a_threshold_is_an_error(tmp_path: Path) -> None:
    text = "[regions.north]\nthresholds.cases = { value = 300, lable = 'surge line' }\n"
    with pytest.raises(ConfigError, match=re.escape("regions.north.thresholds.cases.lable")):
        load_config(_write(tmp_path, text))


@pytest.mark.parametrize(
    ("text", "key"),
    [
        ("[scoring]\nalpha = nan\n", "scoring.alpha"),
        ("[regions.north]\npopulation = inf\n", "regions.north.population"),
        ("[regions.north]\nthresholds.cases = nan\n", "regions.north.thresholds.cases"),
    ],
)
def test_non_finite_numbers_are_an_error(tmp_path: Path, text: str, key: str) -> None:
    with pytest.raises(ConfigError, match=re.escape(f"'{key}'")):
        load_config(_write(tmp_path, text))


def test_parse_config_without_a_file_resolves_paths_from_base(tmp_path: Path) -> None:
    cfg = parse_config({"inputs": {"forecasts": "f.csv"}}, base=tmp_path)
    assert cfg.forecasts == (tmp_path / "f.csv",)
    with pytest.raises(ConfigError, match=r"^configuration: key 'scoring\.alpha'"):
        parse_config({"scoring": {"alpha": 2}})


def test_with_overrides_replaces_only_the_values_given() -> None:
    cfg = BriefingConfig(title="A", archive=Path("one"))
    new = cfg.with_overrides(archive=Path("two"), forecasts=None)
    assert (new.title, new.archive, new.forecasts) == ("A", Path("two"), ())


# --------------------------------------------------------------------------------------------
# through the command line


def _small_inputs(folder: Path, *, last_issue: str) -> tuple[Path, Path]:
    """The demo scenario, keeping only submissions issued up to ``last_issue`` (a quick run)."""
    write_scenario(generate_scenario(), folder)
    for path in (folder / "submissions").rglob("*.csv"):
        if path.stem > last_issue:
            path.unlink()
    return folder / "submissions", folder / "observations.csv"


def test_bad_config_through_the_cli_is_one_line_exit_2(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _write(tmp_path, "[scoring]\nalpha = 2\n")
    assert main(["brief", "--config", str(path)]) == 2
    err = capsys.readouterr().err
    assert "'scoring.alpha'" in err
    assert "Traceback" not in err
    assert err.startswith("forebrief brief: error: ")


@pytest.mark.slow
@pytest.mark.filterwarnings(WEASYPRINT_ICC_LEAK)
def test_flags_override_the_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    subs, obs = _small_inputs(tmp_path / "demo", last_issue="2026-08-17")
    # the file names other inputs and another archive; the flags must win
    path = _write(
        tmp_path,
        """
        [briefing]
        title = "Title from the file"
        [inputs]
        forecasts = "no-such-folder"
        observations = "no-such-file.csv"
        [archive]
        folder = "archive-from-file"
        [scoring]
        backtest_weeks = 1
        [email]
        from = "desk@example.org"
        to = "board@example.org"
        """,
    )
    other = tmp_path / "archive-from-flag"
    code = main(
        [
            "brief",
            "--config",
            str(path),
            "--forecasts",
            str(subs),
            "--observations",
            str(obs),
            "--archive",
            str(other),
            "--issued",
            "2026-08-10",
            "-q",
        ]
    )
    captured = capsys.readouterr()
    assert code == 0, captured.err
    record = other / "2026-08-10"
    assert captured.out.strip() == str(record)
    assert not (tmp_path / "archive-from-file").exists()
    manifest = json.loads((record / "manifest.json").read_text(encoding="utf-8"))
    inputs = {Path(i["path"]) for i in manifest["inputs"]}
    assert obs in inputs
    assert {p.parent.parent for p in inputs if p != obs} == {subs}
    assert manifest["config"]["title"] == "Title from the file"  # the rest is from the file
    assert manifest["config"]["backtest_weeks"] == 1
    assert manifest["config"]["archive"] == str(other)
    facts = json.loads((record / "facts.json").read_text(encoding="utf-8"))
    assert (facts["issued"], facts["title"]) == ("2026-08-10", "Title from the file")
