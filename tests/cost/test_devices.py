"""`estimate --device`: the parts it knows, refusals that need no tools, and older reports'
per-target estimates read as their part's."""

from helpers import assert_one_line_error, run
from thresh2hdl.cost import DEVICES
from thresh2hdl.reports.estimates import estimates_of, read_estimates, store_estimate
from thresh2hdl.reports.fields import Table

# An estimate as report.json held it when estimates were kept per target, without device
# key, logic cells or capacity (figures invented for the test, in the shape that code wrote).
OLDER_UP5K = {
    "target": "ice40", "device": "--up5k --package sg48", "device_name": "UP5K",
    "lut4_equivalents": 360, "luts": 360, "carries": 230, "flip_flops": 21, "dsps": 0,
    "dsp_inference": False, "placed": True, "fmax_mhz": 24.3,
    "tool_versions": {"yosys": "Yosys 0.70", "nextpnr": "nextpnr-0.11.1"}}
OLDER_ECP5 = dict(OLDER_UP5K, target="ecp5", device="--25k --package CABGA256",
                  device_name="LFE5U-25F", dsps=2)


def refusal(tmp_path, *options):
    """``estimate`` on a folder with a report.json, refused before anything is read."""
    folder = tmp_path / "build"
    folder.mkdir()
    (folder / "report.json").write_text('{"kept": true}\n')
    result = run("estimate", folder, *options)
    assert (folder / "report.json").read_text() == '{"kept": true}\n'
    assert sorted(p.name for p in folder.iterdir()) == ["report.json"]
    return result


def test_an_unknown_device_is_one_line_naming_the_known_ones(tmp_path):
    result = refusal(tmp_path, "--device", "xc7a35t")
    assert_one_line_error(result, 2, "--device: unknown device 'xc7a35t'; choose one of "
                                     "up5k, hx8k, ecp5-25, ecp5-45, ecp5-85")
    assert result.stdout == ""


def test_a_device_of_another_family_than_the_target_is_refused(tmp_path):
    result = refusal(tmp_path, "--target", "ice40", "--device", "ecp5-45")
    assert_one_line_error(result, 2, "--device: device ecp5-45 is an ECP5 part, not ice40; "
                                     "drop --target or give --target ecp5")


def test_every_part_is_of_a_family_and_has_its_family_first_as_default():
    # The capacities themselves are checked against nextpnr's chip database in
    # tests/cost/test_estimate.py (they need the tools).
    assert {d.family for d in DEVICES.values()} == {"ice40", "ecp5"}
    assert list(DEVICES)[:2] == ["up5k", "hx8k"]
    for part in DEVICES.values():
        assert part.logic_cells > 0 and part.flip_flops >= part.logic_cells // 2


def test_older_per_target_estimates_read_as_their_part():
    report = {"estimates": {"ecp5": OLDER_ECP5, "ice40": OLDER_UP5K}}
    # Keyed by the part their nextpnr arguments select, in the order of DEVICES.
    assert list(estimates_of(report)) == ["up5k", "ecp5-25"]
    read = read_estimates(Table(report, source="report.json"))
    assert list(read) == ["up5k", "ecp5-25"]
    # No logic cells recorded: the capacity is the known part's, its share left out.
    assert read["up5k"].capacity_text() == \
        "21 of 5,280 flip-flops (0.4%), 0 of 8 DSP blocks (0.0%)"
    assert read["ecp5-25"].capacity_text().endswith("2 of 28 DSP blocks (7.1%)")
    # A new estimate of the same part replaces the older one; the other part's is kept.
    new = dict(OLDER_UP5K, device_id="up5k", logic_cells=561, fmax_mhz=30.0)
    store_estimate(report, new)
    assert report["estimates"] == {"up5k": new, "ecp5-25": OLDER_ECP5}
    # The oldest layout, a single `estimate`, reads the same way.
    assert list(estimates_of({"estimate": OLDER_ECP5})) == ["ecp5-25"]
