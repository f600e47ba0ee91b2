"""The model file: features, units and ports, read and written as TOML; datasets."""

from .data import check_ranges, dataset_for_model, read_csv
from .records import (FeatureFormat, MAX_BIAS_BITS, MAX_FEATURES, MAX_UNITS, Model, PortNames, Unit,
                      load_model, load_toml, model_to_toml, parse_features, parse_model)

__all__ = ["check_ranges", "dataset_for_model", "read_csv", "FeatureFormat", "MAX_BIAS_BITS",
           "MAX_FEATURES", "MAX_UNITS", "Model", "PortNames", "Unit", "load_model", "load_toml",
           "model_to_toml", "parse_features", "parse_model"]
