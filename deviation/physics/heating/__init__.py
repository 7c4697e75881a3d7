"""Cold-spot temperature prediction: step responses and their superposition (numpy/scipy only).

- ``conduction``: analytical series for the centre of a finite cylinder or a brick
  (Carslaw & Jaeger), fh <-> diffusivity (Olson & Jackson 1942), theoretical centre jh.
- ``heating_curve``: Ball's (1923) empirical first-order-with-lag step response.
- ``superposition``: Duhamel superposition of a step response over a retort record.
"""

from deviation.physics.heating.conduction import (
    ModelInputError,
    brick_centre_unaccomplished,
    cylinder_centre_unaccomplished,
    diffusivity_from_fh_brick,
    diffusivity_from_fh_cylinder,
    fh_from_diffusivity_brick,
    fh_from_diffusivity_cylinder,
    slab_centre_unaccomplished,
    theoretical_centre_jh_brick,
    theoretical_centre_jh_cylinder,
)
from deviation.physics.heating.heating_curve import step_unaccomplished
from deviation.physics.heating.superposition import superpose

__all__ = [
    "ModelInputError",
    "brick_centre_unaccomplished",
    "cylinder_centre_unaccomplished",
    "diffusivity_from_fh_brick",
    "diffusivity_from_fh_cylinder",
    "fh_from_diffusivity_brick",
    "fh_from_diffusivity_cylinder",
    "slab_centre_unaccomplished",
    "step_unaccomplished",
    "superpose",
    "theoretical_centre_jh_brick",
    "theoretical_centre_jh_cylinder",
]
