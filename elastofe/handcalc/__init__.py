"""Hand-calculation expectations for checking finite-element results.

Pure functions only; this package imports nothing else from elastofe.
Every function names its published source in its docstring.
"""

from .beams import (
    VariableSectionCantilever,
    bending_stress,
    bimetal_curvature,
    cantilever_tapered_rectangle,
    cantilever_tip_deflection_point_load,
    cantilever_tip_deflection_uniform_load,
    cantilever_variable_section,
    cantilever_variable_section_deflection_at,
    simply_supported_midspan_deflection_point_load,
    simply_supported_midspan_deflection_uniform_load,
)
from .concentration import (
    kirsch_hole_edge_stress,
    kirsch_stresses,
    kt_gross_from_net,
    kt_net_central_hole,
    kt_net_from_gross,
)
from .sections import (
    Section,
    circle,
    cowper_shear_coefficient_hollow_circle,
    cowper_shear_coefficient_rectangle,
    cowper_shear_coefficient_solid_circle,
    cowper_shear_coefficient_thin_tube,
    hollow_circle,
    polygon,
    principal_second_moments,
    rectangle,
    rectangle_torsion_constant,
)
from .solids import (
    CompoundCylinder,
    ThickCylinder,
    ThickSphere,
    compound_cylinder,
    shaft_polar_moment,
    shaft_shear_stress,
    shaft_twist_angle,
    thick_cylinder,
    thick_sphere,
)
from .stability import (
    effective_length_factor,
    engesser_buckling_load,
    euler_buckling_load,
)
from .vibration import (
    bar_axial_effective_mass_fractions,
    bar_axial_frequencies,
    beam_roots,
    cantilever_effective_mass_fractions,
    euler_bernoulli_frequencies,
    shaft_torsion_frequencies,
    timoshenko_frequencies,
)

__all__ = [
    # sections
    "Section",
    "rectangle",
    "circle",
    "hollow_circle",
    "polygon",
    "principal_second_moments",
    "rectangle_torsion_constant",
    "cowper_shear_coefficient_rectangle",
    "cowper_shear_coefficient_solid_circle",
    "cowper_shear_coefficient_hollow_circle",
    "cowper_shear_coefficient_thin_tube",
    # beams
    "bending_stress",
    "cantilever_tip_deflection_point_load",
    "cantilever_tip_deflection_uniform_load",
    "simply_supported_midspan_deflection_point_load",
    "simply_supported_midspan_deflection_uniform_load",
    "VariableSectionCantilever",
    "cantilever_variable_section",
    "cantilever_tapered_rectangle",
    "cantilever_variable_section_deflection_at",
    "bimetal_curvature",
    # solids
    "ThickCylinder",
    "thick_cylinder",
    "CompoundCylinder",
    "compound_cylinder",
    "ThickSphere",
    "thick_sphere",
    "shaft_polar_moment",
    "shaft_shear_stress",
    "shaft_twist_angle",
    # concentration
    "kirsch_stresses",
    "kirsch_hole_edge_stress",
    "kt_net_central_hole",
    "kt_gross_from_net",
    "kt_net_from_gross",
    # vibration
    "beam_roots",
    "euler_bernoulli_frequencies",
    "timoshenko_frequencies",
    "bar_axial_frequencies",
    "shaft_torsion_frequencies",
    "cantilever_effective_mass_fractions",
    "bar_axial_effective_mass_fractions",
    # stability
    "effective_length_factor",
    "euler_buckling_load",
    "engesser_buckling_load",
]
