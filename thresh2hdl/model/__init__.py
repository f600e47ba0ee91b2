"""The model: its records (:mod:`.records`), the TOML file they are read from and written to
(:mod:`.file`), and the datasets checked against it (:mod:`.data`)."""

from .data import Dataset, check_ranges, dataset_for_model, read_csv
from .file import MODEL_FORMAT, load_model, load_toml, model_to_toml, parse_features, parse_model
from .records import (MAX_BIAS_BITS, MAX_FEATURES, MAX_INPUT_BITS, MAX_UNITS, MAX_WEIGHT_BITS,
                      FeatureFormat, Model, PortNames, Unit)

__all__ = ["Dataset", "check_ranges", "dataset_for_model", "read_csv", "MODEL_FORMAT", "load_model",
           "load_toml", "model_to_toml", "parse_features", "parse_model", "MAX_BIAS_BITS",
           "MAX_FEATURES", "MAX_INPUT_BITS", "MAX_UNITS", "MAX_WEIGHT_BITS", "FeatureFormat",
           "Model", "PortNames", "Unit"]
