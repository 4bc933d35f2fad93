"""Case files: schema (frozen dataclasses) and the validating loader."""
from .load import load_case, parse_case, validate
from .schema import (
    At,
    Beam,
    BeamSection,
    Box,
    Case,
    Combination,
    Cylinder,
    ElasticSupport,
    ForceLoad,
    Geometry,
    GravityLoad,
    Group,
    Line,
    LoadCase,
    Material,
    MeshSpec,
    Plane,
    PressureLoad,
    Probe,
    Refinement,
    SolverSpec,
    SpreadLoad,
    Support,
    Surfaces,
    TemperatureLoad,
)

__all__ = ["load_case", "parse_case", "validate", "At", "Beam", "BeamSection", "Box", "Case", "Cylinder", "ForceLoad",
           "Geometry", "GravityLoad", "Group", "Line", "Material", "MeshSpec", "Plane",
           "PressureLoad", "Probe", "Refinement", "SolverSpec", "Support", "Surfaces",
           "Combination", "SpreadLoad", "ElasticSupport", "LoadCase", "TemperatureLoad"]
