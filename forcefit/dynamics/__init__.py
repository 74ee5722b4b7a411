"""Dynamics: power-law forces and their invariants, propagation, the orbit model, simulation,
and the Kasner-Arnold duality."""

from .duality import dual_energy, dual_exponent, dual_strength, dual_track, map_power, specific_energy_at
from .laws import (
    EARTH_ROTATION_RATE,
    angular_momentum,
    apsidal_angle,
    apsidal_angle_circular,
    circular_period,
    circular_speed,
    exponent_from_apsidal_angle,
    exponent_from_precession,
    pendulum_precession_rate,
    potential,
    precession_per_orbit,
    radial_force,
    specific_energy,
)
from .orbit_model import OrbitModel
from .propagate import BatchStates, Drag, States, propagate_batch, propagate_reference
from .simulate import simulate_orbit, simulate_pendulum, spherical_pendulum_states

__all__ = [
    "EARTH_ROTATION_RATE",
    "BatchStates",
    "Drag",
    "OrbitModel",
    "States",
    "angular_momentum",
    "apsidal_angle",
    "apsidal_angle_circular",
    "circular_period",
    "circular_speed",
    "dual_energy",
    "dual_exponent",
    "dual_strength",
    "dual_track",
    "exponent_from_apsidal_angle",
    "exponent_from_precession",
    "map_power",
    "pendulum_precession_rate",
    "potential",
    "precession_per_orbit",
    "propagate_batch",
    "propagate_reference",
    "radial_force",
    "simulate_orbit",
    "simulate_pendulum",
    "specific_energy",
    "specific_energy_at",
    "spherical_pendulum_states",
]
