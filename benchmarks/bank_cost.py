"""FPGA cost of a 10-class bank, lever by lever, against a naive bank, measured in one run.

    python benchmarks/bank_cost.py        (needs pip install 'thresh2hdl[synth]' and
                                          scikit-learn; about ten minutes)

The bank: scikit-learn's bundled 8x8 digits (64 raw codes 0..16 on 5-bit ports, the guard's
clamp and flag on), a logistic regression on standardised features folded into the raw codes
and quantized to 6-bit weights, split ``train_test_split(test_size=0.25, random_state=0)``;
the decision is the class index ``y`` (no score ports). The naive bank is plain Verilog
written here: every product and sum in 32-bit signed arithmetic, the argmax on the sums, a
registered class (synthesis only: it does not fit the part). Each step is built, synthesised
by Yosys and placed by nextpnr on the iCE40 UP5K (5,280 logic cells) in the measuring wrapper
of ``thresh2hdl.cost`` (its input shift chain and output registers included in the count).

Targets (issue 16): one result per clock in <= 3,000 logic cells (<= 0.45x the plain
``shiftadd`` bank) with test accuracy >= 0.95; pipelined, >= 60 MHz (median of five seeds).
"""

import statistics

import numpy as np
from sklearn.datasets import load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.preprocessing import StandardScaler

from thresh2hdl.analysis.shared import plan_sharing
from thresh2hdl.cost.estimate import estimate_cost
from thresh2hdl.emit.verilog import emit_verilog, port_table
from thresh2hdl.errors import DoesNotFitError
from thresh2hdl.hardware import UnitConfig, make_component
from thresh2hdl.model.records import FeatureFormat, Model, PortNames, Unit
from thresh2hdl.train import digits_per_unit
from thresh2hdl.train.quantize import FloatModel, decide, fold_normalisation, to_integer_weights
from thresh2hdl.verify.reference import ReferenceModel

WEIGHT_BITS = 6
DIGIT_BUDGET = 240          # nonzero signed digits over all 640 weights (at most one each)
PIPELINE = 14               # register stages of the pipelined step
SEEDS = (1, 2, 3, 4, 5)


def digits_data():
    x, y = load_digits(return_X_y=True)
    return train_test_split(x.astype(np.int64), y, test_size=0.25, random_state=0)


def folded_weights(x_train, y_train):
    scaler = StandardScaler().fit(x_train)
    fitted = LogisticRegression(max_iter=5000).fit(scaler.transform(x_train), y_train)
    return fold_normalisation(FloatModel(fitted.coef_, fitted.intercept_, scaler.mean_,
                                         scaler.scale_, np.zeros(64, int), np.full(64, 16)))


def integer_model(weights, biases):
    features = [FeatureFormat(f"p{i}", 5, False, 0, 16) for i in range(64)]
    units = [Unit(f"digit{k}", tuple(int(v) for v in row), int(b))
             for k, (row, b) in enumerate(zip(weights, biases))]
    return Model(module="digits", features=features, units=units, ports=PortNames(score=""))


def naive_verilog(weights, biases):
    """Every product and sum 32-bit signed; the argmax as a chain, ties to the lower index."""
    ports = "".join(f"  input wire [4:0] x{i},\n" for i in range(64))
    lines = [f"module naive (\n  input wire clk,\n{ports}  output reg [3:0] y\n);"]
    for k, (row, b) in enumerate(zip(weights, biases)):
        terms = " + ".join(f"$signed({{27'd0, x{i}}}) * {int(w)}" for i, w in enumerate(row))
        lines.append(f"  wire signed [31:0] s{k} = {terms} + {int(b)};")
    lines.append("  wire signed [31:0] b0 = s0;\n  wire [3:0] c0 = 4'd0;")
    for k in range(1, len(weights)):
        lines.append(f"  wire signed [31:0] b{k} = s{k} > b{k - 1} ? s{k} : b{k - 1};")
        lines.append(f"  wire [3:0] c{k} = s{k} > b{k - 1} ? 4'd{k} : c{k - 1};")
    lines.append(f"  always @(posedge clk) y <= c{len(weights) - 1};\nendmodule\n")
    return "\n".join(lines)


def placed(text, module, ports, seed=1):
    """The figures of one placement, or the synthesis figures of a design too large."""
    try:
        return estimate_cost(text, module, ports, device="up5k", seed=seed)
    except DoesNotFitError as refused:
        return refused.figures


def cells(figures):
    where = "placed" if figures["placed"] else "does not fit"
    return f"{figures['logic_cells']:,} logic cells ({where}), {figures['luts']:,} LUT4"


def main():
    x_train, x_test, y_train, y_test = digits_data()
    weights, bias = folded_weights(x_train, y_train)
    centre = np.full(64, 8)
    plain = to_integer_weights(weights, bias, WEIGHT_BITS, x_train, labels=y_train,
                               refine_epochs=20, centre=centre)
    budgeted = to_integer_weights(weights, bias, WEIGHT_BITS, x_train, labels=y_train,
                                  refine_epochs=20, centre=centre, max_digits=1,
                                  digit_budget=DIGIT_BUDGET)
    naive = placed(naive_verilog(plain.weights, plain.biases), "naive",
                   [("clk", "clk", "input", 1, False)] +
                   [(f"x{i}", f"x{i}", "input", 5, False) for i in range(64)] +
                   [("y", "y", "output", 4, False)])
    print(f"naive 32-bit bank (synthesis only): {naive['luts']:,} LUT4  "
          f"({naive['tool_versions']['yosys']}, {naive['tool_versions']['nextpnr']})")
    steps = [("shiftadd", plain, False), (f"digit budget {DIGIT_BUDGET}", budgeted, False),
             ("shared terms", plain, True), ("budget and sharing", budgeted, True)]
    base = None
    for name, result, share in steps:
        model = integer_model(result.weights, result.biases)
        accuracy = float(np.mean(ReferenceModel.from_model(model).decisions(x_test) == y_test))
        sharing = plan_sharing([list(u.weights) for u in model.units])
        adders = sharing.adders_with if share else sharing.adders_without
        dut = make_component(UnitConfig(model, arch="shiftadd", share_terms=share))
        figures = placed(emit_verilog(dut, model), model.module, port_table(dut, model))
        base = base or figures["logic_cells"]
        fmax = f", {figures['fmax_mhz']:.1f} MHz" if figures["fmax_mhz"] else ""
        print(f"{name:20s}: {sum(digits_per_unit(result.weights))} digits, {adders} adders, "
              f"{cells(figures)}{fmax}, {figures['logic_cells'] / base:.2f}x shiftadd's "
              f"logic cells (target <= 0.45x, <= 3,000), test accuracy {accuracy:.3f} "
              f"(target >= 0.95)")
    model = integer_model(budgeted.weights, budgeted.biases)
    dut = make_component(UnitConfig(model, arch="shiftadd", share_terms=True,
                                    pipeline=PIPELINE))
    text, ports = emit_verilog(dut, model), port_table(dut, model)
    runs = [placed(text, model.module, ports, seed=seed) for seed in SEEDS]
    fmax = sorted(run["fmax_mhz"] for run in runs)
    print(f"budget and sharing, {PIPELINE} register stages (latency {dut.latency}): "
          f"{cells(runs[0])}, {runs[0]['flip_flops']:,} flip-flops; fmax over seeds "
          f"{list(SEEDS)}: median {statistics.median(fmax):.1f} MHz (min {fmax[0]:.1f}, "
          f"max {fmax[-1]:.1f}; target >= 60 MHz)")


if __name__ == "__main__":
    main()
