"""Making integer models: perceptron training on raw codes (:mod:`.perceptron`, its walk through
the rows compiled by numba in :mod:`.kernel`), and bringing a real-valued model's weights into a
bit budget while keeping its decisions (:mod:`.quantize`), optionally with few nonzero signed
digits per weight (:mod:`.digits`) or in all (:mod:`.budget`), and the rule the fabric learns
by (:mod:`.on_chip`).

Both give :class:`~thresh2hdl.model.Model` records; reading data and writing model files is the
app's (:mod:`thresh2hdl.app.fit`).
"""

from .budget import check_digit_budget, prune_to_total
from .digits import DigitBudget, check_max_digits, digit_count, digits_per_unit
from .perceptron import (DEFAULT_MAX_WEIGHT_BITS, KEEP, RULES, FitLog, FitOptions, accuracy,
                         choice_lines, class_unit_name, digits_line, fit, predict, train_unit,
                         weight_width)
from .on_chip import (MAX_REGISTER_BITS, OnChipLog, OnChipRule, fit_on_chip, learn_in_order,
                      parse_learning_rate, unit_targets)
from .quantize import (FLOAT_ARRAYS, FloatModel, IntegerWeights, decide, fold_normalisation,
                       load_float_model, to_integer_weights)

__all__ = ["check_digit_budget", "prune_to_total", "DigitBudget", "check_max_digits", "digit_count", "digits_per_unit", "digits_line",
           "DEFAULT_MAX_WEIGHT_BITS", "KEEP", "RULES", "FitLog", "FitOptions", "accuracy",
           "choice_lines", "class_unit_name", "fit", "predict", "train_unit", "weight_width",
           "FLOAT_ARRAYS", "FloatModel", "IntegerWeights", "decide", "fold_normalisation",
           "load_float_model", "to_integer_weights", "MAX_REGISTER_BITS", "OnChipLog", "OnChipRule",
           "fit_on_chip", "learn_in_order", "parse_learning_rate", "unit_targets"]
