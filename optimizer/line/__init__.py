"""The lumped line model: transport along the belt, compartments, absorption, drying, energy."""

from .model import (COMPARTMENTS, LineModel, Outcome, Passages, ProductTables, ReflectionRelation, Trajectory,
                    lambert_field_weights)
from .params import ModelParameters, ParameterSpec, parameter_specs

__all__ = ["COMPARTMENTS", "LineModel", "ModelParameters", "Outcome", "ParameterSpec", "Passages", "ProductTables",
           "ReflectionRelation", "Trajectory", "lambert_field_weights", "parameter_specs"]
