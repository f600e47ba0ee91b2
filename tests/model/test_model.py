import pytest

from thresh2hdl.errors import InputError
from thresh2hdl.app import demo_model
from thresh2hdl.model import load_model, model_to_toml, parse_model
from thresh2hdl.names import VERILOG_KEYWORDS, check_identifier

GOOD = """
model_format = 1
[module]
name = "trig"
score_bits = 20
[module.ports]
decision = "hit"
[[feature]]
name = "a"
bits = 12
[[feature]]
bits = 8
signed = true
min = -100
max = 90
[[unit]]
weights = [3, -2]
bias = -5
"""


def write(tmp_path, text):
    path = tmp_path / "m.toml"
    path.write_text(text)
    return path


def test_good_file_loads(tmp_path):
    model = load_model(write(tmp_path, GOOD))
    assert model.module == "trig"
    assert model.score_bits == 20
    assert model.ports.decision == "hit"
    assert model.features[1].name == "x1"
    assert model.feature_ranges == ((0, 4095), (-100, 90))
    assert model.unit.weights == (3, -2) and model.unit.bias == -5


def test_canonical_text_reads_back_equal(tmp_path):
    model = load_model(write(tmp_path, GOOD))
    again = load_model(write(tmp_path, model_to_toml(model)))
    assert again == model
    demo = demo_model()
    assert load_model(write(tmp_path, model_to_toml(demo))) == demo


BAD = [
    ("not toml [", "not valid TOML"),
    ("model_format = 2", "model_format"),
    (GOOD.replace("model_format = 1", ""), "missing key 'model_format'"),
    (GOOD.replace("bias = -5", "bias = -5\ncolour = 3"), "unit[0]: unknown key 'colour'"),
    (GOOD.replace("weights = [3, -2]", "weights = [3.5, -2]"), "weights[0] must be an integer"),
    (GOOD.replace("weights = [3, -2]", "weights = [nan, -2]"), "weights[0] must be an integer"),
    (GOOD.replace("weights = [3, -2]", "weights = [true, -2]"), "weights[0] must be an integer"),
    (GOOD.replace("weights = [3, -2]", "weights = [3]"), "has 1 weights but the model declares 2"),
    (GOOD.replace("weights = [3, -2]", "weights = [3, 99999999999]"), "does not fit"),
    (GOOD.replace("weights = [3, -2]", 'weights = "3, -2"'), "weights must be an array"),
    (GOOD.replace("bits = 12", "bits = 33"), "feature[0]: bits must be an integer from 1 to 32"),
    (GOOD.replace("bits = 12", "bits = 0"), "feature[0]: bits must be an integer from 1 to 32"),
    (GOOD.replace("bits = 12", 'bits = "12"'), "feature[0]: bits must be an integer"),
    (GOOD.replace("max = 90", "max = 200"), "outside the 8-bit signed code range"),
    (GOOD.replace("min = -100", "min = 95"), "min 95 is greater than max 90"),
    (GOOD.replace('name = "trig"', 'name = "module"'), "Verilog keyword"),
    (GOOD.replace('name = "trig"', 'name = "2fast"'), "must be a Verilog identifier"),
    (GOOD.replace('name = "trig"', 'name = "../up"'), "must be a Verilog identifier"),
    (GOOD.replace('name = "trig"', 'name = "\\\\escaped"'), "must be a Verilog identifier"),
    (GOOD.replace('name = "a"', 'name = "hit"'), "clashes with port decision"),
    (GOOD.replace('decision = "hit"', 'decision = "score"'), "used for both"),
    (GOOD.replace("[[unit]]", "[[unitx]]"), "unknown key 'unitx'"),
    (GOOD.replace("weights = [3, -2]\n", ""), "missing key 'weights'"),
    (GOOD.replace("score_bits = 20", "score_bits = 500"), "score_bits must be an integer from 1 to 128"),
    (GOOD.replace("bias = -5", "bias = -5\nbias = 3"), "not valid TOML"),
    (GOOD.replace("model_format = 1", "model_format = 1\nclass_labels = [1]"), "class_labels must be 2 integers"),
    ("model_format = 1\n[[unit]]\nweights=[1]\n", "missing [[feature]]"),
]


@pytest.mark.parametrize("text, expected", BAD)
def test_bad_file_names_file_and_field(tmp_path, text, expected):
    path = write(tmp_path, text)
    with pytest.raises(InputError) as info:
        load_model(path)
    message = str(info.value)
    assert expected in message
    assert str(path) in message
    assert "\n" not in message


def test_missing_and_unreadable_files(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        load_model(tmp_path / "absent.toml")
    with pytest.raises(InputError, match="is a folder"):
        load_model(tmp_path)
    path = tmp_path / "bin.toml"
    path.write_bytes(b"\xff\xfe\x00")
    with pytest.raises(InputError, match="not UTF-8"):
        load_model(path)


def test_identifier_rules():
    # IEEE 1364-2005 section 3.7 and IEEE 1800-2017 Annex B reserve these words.
    for word in ("module", "wire", "reg", "always", "logic", "endmodule", "input"):
        assert word in VERILOG_KEYWORDS
        with pytest.raises(ValueError, match="keyword"):
            check_identifier(word, "name")
    assert check_identifier("adc_ch0", "name") == "adc_ch0"
    for bad in ("a b", "a-b", "a/b", "..", "", "a$b", "_private", "é"):
        with pytest.raises(ValueError):
            check_identifier(bad, "name")


def test_parse_model_rejects_wrong_top_level_type():
    with pytest.raises(InputError, match="must be a table"):
        parse_model({"model_format": 1, "module": 3, "feature": [], "unit": []})


def test_model_errors_name_fields_not_options(tmp_path):
    model = load_model(write(tmp_path, GOOD))
    for change, field in ((lambda: model.with_module("wire"), "module"),
                          (lambda: model.with_score_bits(500), "score_bits")):
        with pytest.raises(InputError) as info:
            change()
        assert info.value.field == field and "--" not in str(info.value)
    assert model.with_module("trig2").module == "trig2"
    assert model.with_score_bits(24).score_bits == 24


def test_a_bank_has_no_single_unit_and_says_where_its_units_are(tmp_path):
    bank = load_model(write(tmp_path, GOOD + "[[unit]]\nweights = [1, 1]\n"))
    assert bank.is_bank and len(bank.units) == 2
    with pytest.raises(InputError) as info:
        bank.unit
    message = str(info.value)
    assert info.value.field == "unit" and "bank of 2 units" in message
    assert "units[0] to units[1]" in message and "not supported" not in message
