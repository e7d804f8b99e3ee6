"""study.toml validation: every key checked, messages name key, value and what is allowed."""

from pathlib import Path

import pytest

from sleepfuse.model.config import build_config, load_config
from sleepfuse.model.errors import ConfigError


def test_defaults_without_study_toml(tmp_path):
    cfg = load_config(tmp_path)
    assert cfg.study.timezone  # the machine's zone
    assert cfg.study.timezone_from_machine
    assert cfg.actigraphy.algorithm == "cole-kripke"
    assert cfg.study.name == tmp_path.name


def test_reads_study_toml(tmp_path):
    (tmp_path / "study.toml").write_text(
        '[study]\nname = "Pilot"\ntimezone = "Europe/Berlin"\n[actigraphy]\ncount_scale = 0.5\nwebster = false\n'
    )
    cfg = load_config(tmp_path)
    assert cfg.study.name == "Pilot" and cfg.timezone == "Europe/Berlin"
    assert cfg.actigraphy.count_scale == 0.5 and cfg.actigraphy.webster is False
    assert not cfg.study.timezone_from_machine


@pytest.mark.parametrize(
    "data, key, fragment",
    [
        ({"study": {"timezone": "Mars/Olympus"}}, "study.timezone", "IANA"),
        ({"actigraphy": {"algorithm": "magic"}}, "actigraphy.algorithm", "cole-kripke, sadeh"),
        ({"actigraphy": {"count_scale": -1}}, "actigraphy.count_scale", "positive"),
        ({"actigraphy": {"count_scale": "big"}}, "actigraphy.count_scale", "a number"),
        ({"actigraphy": {"webster": "yes"}}, "actigraphy.webster", "true or false"),
        ({"actigraphy": {"algoritm": "sadeh"}}, "actigraphy.algoritm", "algorithm"),
        ({"psg": {"labels": {"Stage Z": "N5"}}}, "psg.labels.Stage Z", "N1"),
        ({"nonsense": {"a": 1}}, "nonsense", "sections"),
        ({"study": {"participant_pattern": "("}}, "study.participant_pattern", "regular expression"),
        ({"scoring": {"max_invalid_pct": 150}}, "scoring.max_invalid_pct", "0 to 100"),
        ({"diary": {"columns": {"bedtimes": "x"}}}, "diary.columns", "bedtime"),
        ({"actigraphy": {"sadeh_scale": -2}}, "actigraphy.sadeh_scale", "positive"),
        ({"actigraphy": {"webster_order": "backwards"}}, "actigraphy.webster_order", "sequential, parallel"),
        ({"actigraphy": {"scale_for": 1.0}}, "actigraphy.scale_for", "keys"),
        ({"agreement": {"loa_ci": "wide"}}, "agreement.loa_ci", "exact, approximate"),
        ({"agreement": {"bootstrap_replicates": 10}}, "agreement.bootstrap_replicates", "100 to 100000"),
        ({"agreement": {"bootstrap_replicates": 1000.5}}, "agreement.bootstrap_replicates", "whole number"),
        ({"agreement": {"bootstrap_seed": True}}, "agreement.bootstrap_seed", "whole number"),
    ],
)
def test_bad_values_name_key_value_and_allowed(tmp_path, data, key, fragment):
    with pytest.raises(ConfigError) as info:
        build_config(tmp_path, data)
    msg = str(info.value)
    assert key in msg and fragment in msg


def test_per_algorithm_count_scales_and_agreement_keys(tmp_path):
    (tmp_path / "study.toml").write_text(
        "[actigraphy]\ncount_scale = 0.5\nsadeh_scale = 2.0\nwebster_order = \"parallel\"\n"
        "[agreement]\nloa_ci = \"approximate\"\nbootstrap_replicates = 500\nbootstrap_seed = 7\n"
    )
    cfg = load_config(tmp_path)
    assert cfg.actigraphy.scale_for("sadeh") == 2.0 and cfg.actigraphy.scale_for("cole-kripke") == 0.5
    assert cfg.actigraphy.webster_order == "parallel"
    assert (cfg.agreement.loa_ci, cfg.agreement.bootstrap_replicates, cfg.agreement.bootstrap_seed) == ("approximate", 500, 7)


def test_bad_toml_syntax(tmp_path):
    (tmp_path / "study.toml").write_text("[study\nname=")
    with pytest.raises(ConfigError, match="valid TOML"):
        load_config(tmp_path)


def test_participant_from_file_name(tmp_path):
    cfg = build_config(tmp_path, {})
    assert cfg.participant_of(Path("P01_night1.edf")) == "P01"
    cfg = build_config(tmp_path, {"study": {"participant_pattern": r"sub-(\w+?)-"}})
    assert cfg.participant_of(Path("sub-007-ses1.edf")) == "007"
    assert cfg.participant_of(Path("other.edf")) is None
