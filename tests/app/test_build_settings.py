"""The settings record a build writes (build_settings.json), and the folder reload that reads
it: check, prove and estimate rebuild the design from the record, and from the report's keys
in a folder built before the record was written."""

import json
import shutil
from dataclasses import fields

import pytest

from helpers import bank_model
from thresh2hdl.app import BuildOptions, BuildSettings, build, demo_model
from thresh2hdl.app.cli import main
from thresh2hdl.app.folder import load_folder
from thresh2hdl.hardware import FULL_PIPELINE, UnitConfig

RECORD = "build_settings.json"


@pytest.fixture(scope="module")
def split_folder(tmp_path_factory):
    # Choices far from every default, and a pipeline the build resolves ('full').
    out = tmp_path_factory.mktemp("split") / "demo"
    build(demo_model(), out, BuildOptions(
        simulator="amaranth", vectors=50, arch="shiftadd", pipeline=FULL_PIPELINE, split_bits=9,
        carry_registers=2, clamp=False, module="pump_split"))
    return out


@pytest.fixture(scope="module")
def bank_folder(tmp_path_factory):
    out = tmp_path_factory.mktemp("bank") / "bank"
    model = bank_model([[1, 2, 3], [3, -2, 1], [0, 1, 1]], [0, 5, -5])
    build(model, out, BuildOptions(simulator="amaranth", vectors=50, score_bits=12,
                                   loadable_weights=True, weight_bits=6, pipeline=2))
    return out


def config_of(component):
    # the learning rate is recorded as its text ("1/64")
    return {f.name: str(value) if f.name == "learning_rate" else value
            for f in fields(UnitConfig) if f.name != "model"
            for value in [getattr(component.config, f.name)]}


def copied(folder, tmp_path):
    copy = tmp_path / "copy"
    shutil.copytree(folder, copy)
    return copy


@pytest.mark.parametrize("which", ["split_folder", "bank_folder"])
def test_the_record_holds_the_resolved_choices_and_the_reload_reads_it(which, request,
                                                                       tmp_path):
    folder = copied(request.getfixturevalue(which), tmp_path)
    text = (folder / RECORD).read_text()
    record = json.loads(text)
    built = load_folder(folder)
    assert record["settings_format"] == 1 and text.endswith("}\n")
    # The clocking keys are written only when not the default, so that a default build's
    # record is byte for byte what it was before they could be chosen.
    unwritten = {"reset": "sync-high", "clock_enable": False, "interface": "plain",
                 "weight_port": "plain", "on_chip_learning": False, "learning_rate": "1",
                 "bias_step": None, "dsp_products": None}
    assert set(record) == {"settings_format"} | {f.name for f in fields(BuildSettings)} - \
        set(unwritten)
    assert {key: record.get(key, unwritten.get(key)) for key in config_of(built.component)} == \
        config_of(built.component)
    assert record["latency_cycles"] == built.component.latency
    assert record["module"] == built.model.module and built.verilog.name == \
        f"{record['module']}.v"
    if which == "split_folder":
        # 'full' is recorded as the count it resolved to; the guard as chosen (flag only).
        assert record["pipeline"] == built.component.levels
        assert (record["clamp"], record["range_flag"]) == (False, True)
    else:
        assert (record["score_bits"], record["weight_bits"]) == (12, 6)
    # The report's keys are no longer read for the design: a report whose settings keys say
    # another design (still a report the writers can show) reloads the record's design.
    report = json.loads((folder / "report.json").read_text())
    report["register_stages"] = built.component.latency + 3
    report["tree"]["split_bits"] = 1
    (folder / "report.json").write_text(json.dumps(report))
    assert config_of(load_folder(folder).component) == config_of(built.component)


def test_a_record_with_clocking_rebuilds_it(split_folder, tmp_path):
    # A record written with a reset and an enable reloads them (a record without the keys,
    # as every default build writes it, is the default: the test above).
    folder = copied(split_folder, tmp_path)
    record = json.loads((folder / RECORD).read_text())
    record.update(reset="async-low", clock_enable=True)
    (folder / RECORD).write_text(json.dumps(record))
    config = load_folder(folder).component.config
    assert (config.reset, config.clock_enable) == ("async-low", True)
    assert '"reset": "async-low"' in BuildSettings.of(load_folder(folder).component,
                                                      record["module"]).to_json()


@pytest.mark.parametrize("which", ["split_folder", "bank_folder"])
def test_an_older_folder_without_the_record_reloads_from_its_report(which, request, tmp_path):
    original = request.getfixturevalue(which)
    folder = copied(original, tmp_path)
    (folder / RECORD).unlink()
    older, recorded = load_folder(folder).component, load_folder(original).component

    def design(component):
        # The report tells a unit's score width, not whether it was asked for: the same width.
        return ({k: v for k, v in config_of(component).items() if k != "score_bits"},
                [a.score_bits for a in component.unit_analyses], component.latency)
    assert design(older) == design(recorded)


def exits_2(capsys, argv):
    with pytest.raises(SystemExit) as info:
        main([str(a) for a in argv])
    err = capsys.readouterr().err
    assert info.value.code == 2, err
    assert err.count("\n") == 1 and err.startswith("thresh2hdl: error: ")
    assert "Traceback" not in err
    return err


@pytest.mark.parametrize("edit, expected", [
    (lambda r: "{", "not valid JSON"),
    (lambda r: json.dumps([r]), "is not a build settings record"),
    (lambda r: json.dumps({**r, "settings_format": 2}), "settings_format: must be 1"),
    (lambda r: json.dumps({**r, "split_bits": "9"}), 'split_bits: must be an integer from 0 '
     'to 65536 or null, not "9"'),
    (lambda r: json.dumps({**r, "pipeline": -1}), "pipeline: must be an integer from 0 to "
     "65536, not -1"),
    (lambda r: json.dumps({**r, "clamp": None}), "clamp: must be true or false, not null"),
    (lambda r: json.dumps({k: v for k, v in r.items() if k != "arch"}),
     "arch: must be a text, not missing"),
    (lambda r: json.dumps({**r, "colour": "blue"}), "colour: is not a build setting"),
    (lambda r: json.dumps({**r, "module": "other"}), "module: must be model.toml's module"),
    (lambda r: json.dumps({**r, "split_bits": 1}), "recorded build settings are refused"),
    (lambda r: json.dumps({**r, "arch": "serial"}), "recorded build settings are refused"),
    (lambda r: json.dumps({**r, "latency_cycles": 99}), "latency_cycles is 99"),
    (lambda r: json.dumps({**r, "reset": "async"}), "reset: must be one of sync-high, "
     "sync-low, async-high, async-low"),
    (lambda r: json.dumps({**r, "clock_enable": 1}), "clock_enable: must be true or false"),
    (lambda r: json.dumps({**r, "pipeline": 0, "latency_cycles": 0, "clock_enable": True}),
     "recorded build settings are refused"),
])
def test_an_edited_record_is_one_line_naming_the_file_and_field(split_folder, tmp_path, capsys,
                                                                edit, expected):
    folder = copied(split_folder, tmp_path)
    record = json.loads((folder / RECORD).read_text())
    (folder / RECORD).write_text(edit(record))
    before = {p.name: p.read_bytes() for p in folder.iterdir()}
    for command in ("check", "prove", "estimate"):
        err = exits_2(capsys, [command, folder])
        assert f"{folder / RECORD}: " in err and expected in err
        assert "rebuild the folder" in err or "not valid JSON" in err
    assert {p.name: p.read_bytes() for p in folder.iterdir()} == before


def test_a_shared_bank_reloads_shared_and_a_record_from_before_sharing_reads_as_unshared(
        tmp_path):
    out = tmp_path / "bank"
    model = bank_model([[3, 5, -7], [3, 5, 6], [-3, 5, 7]], [1, -2, 0], bits=3)
    build(model, out, BuildOptions(simulator="amaranth", vectors=50, arch="shiftadd",
                                   share_terms=True))
    assert load_folder(out).component.config.share_terms is True
    # A record written before share_terms existed lacks it: its design shared nothing.
    record = json.loads((out / RECORD).read_text())
    del record["share_terms"]
    (out / RECORD).write_text(json.dumps(record))
    assert load_folder(out).component.config.share_terms is False
