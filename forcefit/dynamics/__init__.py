"""Dynamics: power-law forces and their invariants, propagation, the orbit model, simulation,
and the Kasner-Arnold duality."""

from __future__ import annotations

from typing import TYPE_CHECKING

from .._lazy import lazy_exports

if TYPE_CHECKING:
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
    from .simulate import simulate_orbit, simulate_pendulum, simulate_projected, spherical_pendulum_states

__getattr__, __dir__ = lazy_exports(__name__, {
    "dual_energy": ".duality",
    "dual_exponent": ".duality",
    "dual_strength": ".duality",
    "dual_track": ".duality",
    "map_power": ".duality",
    "specific_energy_at": ".duality",
    "EARTH_ROTATION_RATE": ".laws",
    "angular_momentum": ".laws",
    "apsidal_angle": ".laws",
    "apsidal_angle_circular": ".laws",
    "circular_period": ".laws",
    "circular_speed": ".laws",
    "exponent_from_apsidal_angle": ".laws",
    "exponent_from_precession": ".laws",
    "pendulum_precession_rate": ".laws",
    "potential": ".laws",
    "precession_per_orbit": ".laws",
    "radial_force": ".laws",
    "specific_energy": ".laws",
    "OrbitModel": ".orbit_model",
    "BatchStates": ".propagate",
    "Drag": ".propagate",
    "States": ".propagate",
    "propagate_batch": ".propagate",
    "propagate_reference": ".propagate",
    "simulate_orbit": ".simulate",
    "simulate_pendulum": ".simulate",
    "simulate_projected": ".simulate",
    "spherical_pendulum_states": ".simulate",
})

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
    "simulate_projected",
    "simulate_pendulum",
    "specific_energy",
    "specific_energy_at",
    "spherical_pendulum_states",
]
