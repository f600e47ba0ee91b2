"""Training and quantization of threshold units."""

from .perceptron import DEFAULT_MAX_WEIGHT_BITS, FitOptions, choice_lines, class_unit_name, fit
from .quantize import decide, fold_normalisation, load_float_model, to_integer_weights

__all__ = ["DEFAULT_MAX_WEIGHT_BITS", "FitOptions", "choice_lines", "class_unit_name", "fit",
           "decide", "fold_normalisation", "load_float_model", "to_integer_weights"]
