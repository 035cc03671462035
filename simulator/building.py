"""Zone thermal model: a 5R1C lumped network (ISO 13790), gains, solar, stratification.

Each zone is the simple hourly method of ISO 13790:2008 Annex C, generalised
to any time step: three temperature nodes (air, central surface, mass), five
conductances and the heat capacity of the mass. In the standard only the mass
node stores heat and the air and surface nodes follow it algebraically; the
mass node is integrated with its Crank-Nicolson scheme, stable for any step.

One extension, documented in :func:`step_zone`: the air node may hold the heat
capacity of the zone's air and furnishings (5R2C), so that at one-minute steps
the air does not jump the moment a window opens. With that capacity set to
zero the step is exactly the standard's.

Nomenclature
------------
==============================  ======  ===================================================
name                            unit    quantity
==============================  ======  ===================================================
``temp_air``                    °C      θ_air, the zone's mean air temperature
``temp_surface``                °C      θ_s, the central (star) surface node
``temp_mass``                   °C      θ_m, the thermal mass node
``temp_operative``              °C      θ_op = 0.3 θ_air + 0.7 θ_s
``temp_outdoor``                °C      θ_e, outdoor air, also the supply air temperature
``temp_opaque_exterior``        °C      what the opaque envelope sees outside: outdoor air
                                        and ground, weighted by their conductances
``conductance_ventilation``     W/K     H_ve = ρ c_p (infiltration + openings + air handler)
``gains_internal``              W       Φ_int, sensible gains of people, lights, equipment
``gains_solar``                 W       Φ_sol, solar gains through glazing
``heating``                     W       Φ_HC, heat delivered by the plant (negative: cooling)
==============================  ======  ===================================================

Energy balance
--------------
By design of the method a share ``share_window`` = H_tr,w / (9.1 A_t) of the
gains that reach the surfaces (Φ_sol + Φ_int/2) is routed straight out through
the windows and never enters a node (ISO 13790 Annex C, C.3). Per step

    Φ_int + Φ_sol + Φ_HC - share_window (Φ_int/2 + Φ_sol)
        = H_ve (θ_air - θ_e) + H_tr,w (θ_s - θ_e) + H_tr,em (θ_m - θ_e,op)
          + C_m Δθ_m / Δt + C_air Δθ_air / Δt

holds to rounding (:meth:`ThermalStep.balance`), with θ_air, θ_s, θ_m the
step's (weighted) means.

Stratification
--------------
A tall space is one air node, but its sensors sit at different heights. The
simulator reads a sensor at height z as θ_air + G (z - H/2): a linear profile
around the mean. The gradient

    G = min(G_max, s Φ / (ρ c_p (V̇ + n_mix V / 3600)) / H)  [K/m]

is the temperature rise a share ``s`` of the zone's sensible heat Φ (internal,
solar and heating) gives the air that carries it up (V̇: airflow through the
zone, n_mix: an equivalent internal mixing rate). It grows with the gains and
shrinks with the airflow. This is a documented modelling choice of this
simulator (a displacement-style heat balance), not a published correlation.
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from enum import StrEnum
from pathlib import Path
from types import MappingProxyType
from typing import Any, NamedTuple

import numpy as np
import numpy.typing as npt
import pandas as pd

from simulator._yaml import FileReader
from simulator.errors import BuildingError
from simulator.solar import plane_irradiance
from ventsup.config.errors import ConfigProblem
from ventsup.config.model import PointKind, SiteConfig
from ventsup.core.physics import Terrain

__all__ = [
    "CO2_PER_PERSON",
    "COOLING_SETPOINT_WINDOWS_OPEN",
    "HEAT_TRANSFER_AIR_SURFACE",
    "HEAT_TRANSFER_SURFACE_MASS",
    "SURFACE_TO_FLOOR_RATIO",
    "Building",
    "Cooling",
    "Glazing",
    "Heating",
    "InternalLoad",
    "MassClass",
    "MechanicalVentilation",
    "OpeningDetail",
    "People",
    "RCParameters",
    "Reporting",
    "Schedule",
    "Stratification",
    "Surface",
    "ThermalStep",
    "ZoneModel",
    "condition_air",
    "iso13790_parameters",
    "load_building",
    "parse_building",
    "solar_gains",
    "step_zone",
    "stratification_gradient",
    "temperature_at_height",
]

FloatArray = npt.NDArray[np.float64]

#: h_is [W/(m²·K)], heat transfer coefficient between the air and the surface node (ISO 13790 7.2.2.2).
HEAT_TRANSFER_AIR_SURFACE = 3.45
#: h_ms [W/(m²·K)], heat transfer coefficient between the surface and the mass node (ISO 13790 12.2.2).
HEAT_TRANSFER_SURFACE_MASS = 9.1
#: Λ_at [1], area of all surfaces facing the zone per floor area (ISO 13790 7.2.2.2).
SURFACE_TO_FLOOR_RATIO = 4.5
#: CO2 an adult breathes out at about 1.2 met [m³/s per person]: 0.0052 L/s
#: (Persily and de Jonge, Indoor Air 27(5), 2017) [mem].
CO2_PER_PERSON = 0.0052e-3

_SPECIFIC_HEAT_AIR = 1005.0  # [J/(kg·K)]
_GLAZING_CORRECTION = 0.9  # F_w, ISO 13790 11.4.2: non-scattering glazing, g at normal incidence


class MassClass(StrEnum):
    """Thermal mass class of a zone, ISO 13790:2008 Table 12.

    ``area_factor`` is A_m per floor area [1], ``capacity_per_floor_area`` is
    C_m per floor area [J/(K·m²)].
    """

    VERY_LIGHT = "very_light"
    LIGHT = "light"
    MEDIUM = "medium"
    HEAVY = "heavy"
    VERY_HEAVY = "very_heavy"

    @property
    def area_factor(self) -> float:
        """A_m / A_f [1]."""
        return _MASS_CLASSES[self][0]

    @property
    def capacity_per_floor_area(self) -> float:
        """C_m / A_f [J/(K·m²)]."""
        return _MASS_CLASSES[self][1]


_MASS_CLASSES: Mapping[MassClass, tuple[float, float]] = MappingProxyType(
    {
        MassClass.VERY_LIGHT: (2.5, 80_000.0),
        MassClass.LIGHT: (2.5, 110_000.0),
        MassClass.MEDIUM: (2.5, 165_000.0),
        MassClass.HEAVY: (3.0, 260_000.0),
        MassClass.VERY_HEAVY: (3.5, 370_000.0),
    }
)


# --------------------------------------------------------------------------- the RC network


@dataclass(frozen=True)
class RCParameters:
    """The 5R1C network of one zone (ISO 13790 Annex C).

    Parameters
    ----------
    floor_area : float
        A_f, conditioned floor area [m²]; sets the 10 W/m² probe of the heating control.
    conductance_window : float
        H_tr,w, windows and other light elements, outdoor air to surface node [W/K].
    conductance_opaque : float
        H_tr,em, opaque envelope, outside to mass node [W/K].
    conductance_air_surface : float
        H_tr,is = h_is A_t, air node to surface node [W/K].
    conductance_surface_mass : float
        H_tr,ms = h_ms A_m, surface node to mass node [W/K].
    capacity : float
        C_m, heat capacity of the mass node [J/K].
    share_mass : float
        A_m / A_t [1], share of the surface gains that goes to the mass node.
    share_window : float
        H_tr,w / (h_ms A_t) [1], share of the surface gains routed out through the windows.
    capacity_air : float, default 0
        Heat capacity of the air node [J/K]: 0 is ISO 13790's 5R1C (the air
        follows at once); the simulator's zones use the air and furnishings.
    """

    floor_area: float
    conductance_window: float
    conductance_opaque: float
    conductance_air_surface: float
    conductance_surface_mass: float
    capacity: float
    share_mass: float
    share_window: float
    capacity_air: float = 0.0

    def __post_init__(self) -> None:
        for name in (
            "floor_area",
            "conductance_window",
            "conductance_opaque",
            "conductance_air_surface",
            "conductance_surface_mass",
            "capacity",
            "capacity_air",
        ):
            if not getattr(self, name) >= 0.0:
                raise ValueError(f"{name}: got {getattr(self, name)!r}, expected a value >= 0")
        if self.capacity <= 0.0:
            raise ValueError(f"capacity: got {self.capacity!r} J/K, expected a value > 0")
        if not 0.0 <= self.share_mass + self.share_window <= 1.0:
            raise ValueError(
                f"share_mass + share_window: got {self.share_mass + self.share_window!r}, "
                "expected 0 to 1"
            )

    @property
    def share_surface(self) -> float:
        """Share of the surface gains that goes to the surface node [1]."""
        return 1.0 - self.share_mass - self.share_window


def iso13790_parameters(
    floor_area: float,
    mass_class: MassClass | str,
    conductance_opaque_envelope: float,
    conductance_window: float,
    capacity_air: float = 0.0,
) -> RCParameters:
    r"""The 5R1C network of a zone from its floor area, mass class and envelope.

    Parameters
    ----------
    floor_area : float
        A_f [m²].
    mass_class : MassClass or str
        ISO 13790 Table 12 class: ``very_light`` ... ``very_heavy``.
    conductance_opaque_envelope : float
        H_tr,op, Σ U A of walls, roof and ground floor [W/K].
    conductance_window : float
        H_tr,w, Σ U A of the glazing [W/K].
    capacity_air : float, default 0
        Heat capacity of the air node [J/K] (see :class:`RCParameters`).

    Notes
    -----
    :math:`A_t = 4.5 A_f`, :math:`H_{tr,is} = 3.45 A_t`,
    :math:`A_m`, :math:`C_m` from the class, :math:`H_{tr,ms} = 9.1 A_m`, and
    :math:`H_{tr,em} = 1 / (1/H_{tr,op} - 1/H_{tr,ms})`.

    References
    ----------
    .. [1] ISO 13790:2008, Energy performance of buildings - Calculation of
       energy use for space heating and cooling, Annex C and Table 12.

    Examples
    --------
    >>> p = iso13790_parameters(100.0, "medium", 100.0, 50.0)
    >>> round(p.conductance_opaque, 2), p.capacity, round(p.share_window, 4)
    (104.6, 16500000.0, 0.0122)
    """
    mass = MassClass(mass_class)
    total_area = SURFACE_TO_FLOOR_RATIO * floor_area
    mass_area = mass.area_factor * floor_area
    surface_mass = HEAT_TRANSFER_SURFACE_MASS * mass_area
    if conductance_opaque_envelope >= surface_mass:
        raise ValueError(
            f"conductance_opaque_envelope: got {conductance_opaque_envelope:g} W/K, expected "
            f"less than H_tr,ms = {surface_mass:g} W/K (check U-values and areas)"
        )
    opaque = (
        0.0
        if conductance_opaque_envelope == 0.0
        else 1.0 / (1.0 / conductance_opaque_envelope - 1.0 / surface_mass)
    )
    return RCParameters(
        floor_area=floor_area,
        conductance_window=conductance_window,
        conductance_opaque=opaque,
        conductance_air_surface=HEAT_TRANSFER_AIR_SURFACE * total_area,
        conductance_surface_mass=surface_mass,
        capacity=mass.capacity_per_floor_area * floor_area,
        share_mass=mass_area / total_area,
        share_window=conductance_window / (HEAT_TRANSFER_SURFACE_MASS * total_area),
        capacity_air=capacity_air,
    )


class ThermalStep(NamedTuple):
    """One step of the zone network: node temperatures [°C] and heat flows [W].

    ``temp_mass`` and ``temp_air_end`` are the mass and air temperatures at the
    end of the step; the other temperatures are step means (Crank-Nicolson
    uses the means of the stored nodes).
    """

    temp_mass: float
    temp_mass_mean: float
    temp_surface: float
    temp_air: float
    temp_air_end: float
    temp_operative: float
    heating: float
    loss_ventilation: float
    loss_window: float
    loss_opaque: float
    storage: float
    gains_routed_out: float

    def balance(self, gains_internal: float, gains_solar: float) -> float:
        """Heat in minus heat out minus storage [W]; zero to rounding."""
        heat_in = gains_internal + gains_solar + self.heating - self.gains_routed_out
        heat_out = self.loss_ventilation + self.loss_window + self.loss_opaque + self.storage
        return heat_in - heat_out


def step_zone(
    params: RCParameters,
    temp_mass: float,
    temp_outdoor: float,
    temp_opaque_exterior: float,
    conductance_ventilation: float,
    gains_internal: float,
    gains_solar: float,
    heating: float,
    dt: float,
    temp_air: float | None = None,
) -> ThermalStep:
    r"""Advance a zone's network by ``dt`` seconds.

    Parameters
    ----------
    params : RCParameters
        The zone's network.
    temp_mass : float
        θ_m at the start of the step [°C].
    temp_outdoor : float
        θ_e, outdoor air and supply air temperature [°C].
    temp_opaque_exterior : float
        θ_e,op, what the opaque envelope sees outside [°C]; ``temp_outdoor``
        without ground contact.
    conductance_ventilation : float
        H_ve [W/K], may be 0.
    gains_internal, gains_solar : float
        Φ_int and Φ_sol [W].
    heating : float
        Φ_HC [W] delivered to the air node (negative is cooling).
    dt : float
        Time step [s].
    temp_air : float, optional
        θ_air at the start of the step [°C]; used only when the air node stores
        heat (``params.capacity_air`` > 0), default ``temp_mass``.

    Notes
    -----
    With ``capacity_air`` = 0 this is ISO 13790 Annex C eq. C.1-C.11 with
    :math:`C_m/3600` replaced by :math:`C_m/\Delta t`:
    :math:`\Phi_{ia} = 0.5\Phi_{int} + \Phi_{HC}`,
    :math:`\Phi_m = (A_m/A_t)(0.5\Phi_{int} + \Phi_{sol})`,
    :math:`\Phi_{st} = (1 - A_m/A_t - H_{tr,w}/(9.1 A_t))(0.5\Phi_{int} + \Phi_{sol})`,
    and

    .. math::

                heta_{m,t} = rac{	heta_{m,t-1}\,(C_m/\Delta t - (H_{tr,3} + H_{tr,em})/2)
                              + \Phi_{m,tot}}{C_m/\Delta t + (H_{tr,3} + H_{tr,em})/2}

    (Crank-Nicolson; stable for any step, and without sign-alternating ringing
    while :math:`\Delta t < 2 C_m/(H_{tr,3} + H_{tr,em})`). The terms with
    :math:`1/H_{ve}` are rewritten so that :math:`H_{ve} = 0` is allowed.

    With ``capacity_air`` > 0 (the zone air and furnishings, an extension of
    this simulator: 5R2C) the air node stores heat as well; the surface node
    stays algebraic and the two stored nodes advance together (a 2x2 solve)
    by the θ-method: Crank-Nicolson while the step resolves the air node
    (:math:`x = \Delta t (H_{ve} + H_{is}(H_{w} + H_{ms})/(H_{is} + H_{w} + H_{ms}))/C_{air} \le 2`),
    otherwise :math:`w = 1 - 1/x`, which damps the air node instead of
    letting it ring at hourly steps. Every flux uses the same weighted
    temperatures, so the energy balance still closes to rounding; the
    "mean" temperatures of the result are those weighted temperatures. The
    air then follows a change of ventilation over minutes instead of at once,
    which matters at one-minute steps.

    References
    ----------
    .. [1] ISO 13790:2008, Annex C "Simple hourly method".
    """
    h_ve = conductance_ventilation
    h_w = params.conductance_window
    h_em = params.conductance_opaque
    h_is = params.conductance_air_surface
    h_ms = params.conductance_surface_mass
    to_surfaces = 0.5 * gains_internal + gains_solar
    phi_ia = 0.5 * gains_internal + heating
    phi_m = params.share_mass * to_surfaces
    phi_st = params.share_surface * to_surfaces
    if params.capacity_air > 0.0:
        air_start = temp_mass if temp_air is None else temp_air
        # θ_s = (S + H_is θ_a + H_ms θ_m) / D, with S the surface node's own sources.
        sources = phi_st + h_w * temp_outdoor
        total = h_is + h_w + h_ms
        a_aa = -h_ve - h_is * (h_w + h_ms) / total
        a_am = h_is * h_ms / total
        a_mm = -h_em - h_ms * (h_is + h_w) / total
        f_a = phi_ia + h_ve * temp_outdoor + h_is * sources / total
        f_m = phi_m + h_em * temp_opaque_exterior + h_ms * sources / total
        c_a, c_m = params.capacity_air / dt, params.capacity / dt
        # θ-method: Crank-Nicolson (w = 1/2) unless the air node's own rate x = -a_aa Δt / C_a
        # exceeds 2, where w = 1 - 1/x keeps its amplification at >= 0 (no ringing).
        w = max(0.5, 1.0 + c_a / a_aa) if a_aa < 0.0 else 0.5
        v = 1.0 - w
        m11, m12, m21, m22 = c_a - w * a_aa, -w * a_am, -w * a_am, c_m - w * a_mm
        r1 = (c_a + v * a_aa) * air_start + v * a_am * temp_mass + f_a
        r2 = v * a_am * air_start + (c_m + v * a_mm) * temp_mass + f_m
        determinant = m11 * m22 - m12 * m21
        air_end = (r1 * m22 - m12 * r2) / determinant
        mass_end = (m11 * r2 - m21 * r1) / determinant
        air = w * air_end + v * air_start
        mass_mean = w * mass_end + v * temp_mass
        surface = (sources + h_is * air + h_ms * mass_mean) / total
        storage = (
            params.capacity * (mass_end - temp_mass) / dt
            + params.capacity_air * (air_end - air_start) / dt
        )
    else:
        air_side = h_ve + h_is
        h_1 = h_ve * h_is / air_side if air_side > 0.0 else 0.0
        reach = h_is / air_side if air_side > 0.0 else 0.0  # share of Φ_ia reaching the surface
        h_2 = h_1 + h_w
        h_3 = h_2 * h_ms / (h_2 + h_ms) if h_2 + h_ms > 0.0 else 0.0
        to_mass = h_ms / (h_2 + h_ms) if h_2 + h_ms > 0.0 else 1.0
        surface_sources = phi_st + h_w * temp_outdoor + h_1 * temp_outdoor + reach * phi_ia
        phi_m_tot = phi_m + h_em * temp_opaque_exterior + to_mass * surface_sources
        inertia = params.capacity / dt
        half = 0.5 * (h_3 + h_em)
        mass_end = (temp_mass * (inertia - half) + phi_m_tot) / (inertia + half)
        mass_mean = 0.5 * (mass_end + temp_mass)
        surface = (h_ms * mass_mean + surface_sources) / (h_ms + h_w + h_1)
        air = (
            (h_is * surface + h_ve * temp_outdoor + phi_ia) / air_side
            if air_side > 0.0
            else surface
        )
        air_end = air
        storage = params.capacity * (mass_end - temp_mass) / dt
    return ThermalStep(
        temp_mass=mass_end,
        temp_mass_mean=mass_mean,
        temp_surface=surface,
        temp_air=air,
        temp_air_end=air_end,
        temp_operative=0.3 * air + 0.7 * surface,
        heating=heating,
        loss_ventilation=h_ve * (air - temp_outdoor),
        loss_window=h_w * (surface - temp_outdoor),
        loss_opaque=h_em * (mass_mean - temp_opaque_exterior),
        storage=storage,
        gains_routed_out=params.share_window * to_surfaces,
    )


def condition_air(
    params: RCParameters,
    temp_mass: float,
    temp_outdoor: float,
    temp_opaque_exterior: float,
    conductance_ventilation: float,
    gains_internal: float,
    gains_solar: float,
    setpoint_heating: float,
    setpoint_cooling: float,
    max_heating: float,
    max_cooling: float,
    dt: float,
    free: ThermalStep | None = None,
    temp_air: float | None = None,
) -> ThermalStep:
    """One step with ideal heating and cooling that keep the air within the set points.

    Parameters
    ----------
    setpoint_heating, setpoint_cooling : float
        The air stays at or above the first and at or below the second [°C]
        (``-inf`` / ``inf`` to switch one off).
    max_heating, max_cooling : float
        Power available [W], both positive.
    free : ThermalStep, optional
        The same step without heating or cooling, if already computed.
    temp_air : float, optional
        Air temperature at the start of the step, as for :func:`step_zone`.

    Returns
    -------
    ThermalStep
        ``heating`` is Φ_HC [W]: positive heating, negative cooling.

    Notes
    -----
    ISO 13790 C.4.2: the air temperature is linear in Φ_HC, so two probes
    (0 and 10 W/m² of floor) give the power that meets the set point, capped
    at the power available. The set point is met by the step's mean air
    temperature.
    """
    args = (params, temp_mass, temp_outdoor, temp_opaque_exterior, conductance_ventilation)
    if free is None:
        free = step_zone(*args, gains_internal, gains_solar, 0.0, dt, temp_air)
    if free.temp_air < setpoint_heating and max_heating > 0.0:
        setpoint, limit = setpoint_heating, max_heating
    elif free.temp_air > setpoint_cooling and max_cooling > 0.0:
        setpoint, limit = setpoint_cooling, -max_cooling
    else:
        return free
    probe_power = 10.0 * max(params.floor_area, 1.0)
    probe = step_zone(*args, gains_internal, gains_solar, probe_power, dt, temp_air)
    rise = (probe.temp_air - free.temp_air) / probe_power  # [K/W]
    needed = (setpoint - free.temp_air) / rise if rise > 0.0 else limit
    power = min(needed, limit) if limit > 0.0 else max(needed, limit)
    return step_zone(*args, gains_internal, gains_solar, power, dt, temp_air)


# --------------------------------------------------------------------------- stratification


@dataclass(frozen=True)
class Stratification:
    """Vertical temperature profile of a tall zone (see the module docstring).

    Parameters
    ----------
    plume_share : float
        s, share of the zone's sensible heat carried up by plumes [1].
    mixing_air_changes : float
        n_mix, internal mixing as an equivalent airflow [1/h].
    max_gradient : float
        G_max, the steepest gradient allowed [K/m].
    """

    plume_share: float = 0.5
    mixing_air_changes: float = 2.0
    max_gradient: float = 1.0


def stratification_gradient(
    stratification: Stratification,
    heat: float,
    flow: float,
    volume: float,
    height: float,
    density: float,
) -> float:
    """Vertical temperature gradient G [K/m] of a zone (see the module docstring).

    Parameters
    ----------
    heat : float
        Sensible heat released in the zone [W]; only a positive heat stratifies.
    flow : float
        Airflow through the zone: infiltration and openings [m³/s].
    volume, height : float
        Zone volume [m³] and height [m].
    density : float
        Air density [kg/m³].

    Examples
    --------
    >>> round(stratification_gradient(Stratification(), 20_000.0, 2.0, 6300.0, 14.0, 1.2), 3)
    0.108
    """
    mixing = stratification.mixing_air_changes * volume / 3600.0
    carried = flow + mixing
    if heat <= 0.0 or carried <= 0.0 or height <= 0.0:
        return 0.0
    rise = stratification.plume_share * heat / (density * _SPECIFIC_HEAT_AIR * carried)
    return min(stratification.max_gradient, rise / height)


def temperature_at_height(
    temp_air: float, gradient: float, height_sensor: float, height_zone: float
) -> float:
    """Air temperature [°C] at ``height_sensor`` [m] on the linear profile around the mean.

    Examples
    --------
    >>> temperature_at_height(24.0, 0.2, 12.0, 14.0)
    25.0
    """
    return temp_air + gradient * (height_sensor - 0.5 * height_zone)


# --------------------------------------------------------------------------- zone description


@dataclass(frozen=True)
class Schedule:
    """A weekly profile: 24 hourly fractions [0-1] for weekdays, Saturday and Sunday, local time.

    In a file, ``saturday`` defaults to ``weekday`` and ``sunday`` to ``saturday``.
    """

    name: str
    weekday: tuple[float, ...] = field(repr=False)
    saturday: tuple[float, ...] = field(repr=False)
    sunday: tuple[float, ...] = field(repr=False)

    def __post_init__(self) -> None:
        for day in ("weekday", "saturday", "sunday"):
            values = getattr(self, day)
            if len(values) != 24 or not all(0.0 <= v <= 1.0 for v in values):
                raise ValueError(f"schedule {self.name}.{day}: expected 24 values from 0 to 1")

    def values(self, local: pd.DatetimeIndex) -> FloatArray:
        """The profile at each local time (the hour's value holds for the whole hour)."""
        hour = np.asarray(local.hour)
        weekday = np.asarray(local.day_of_week)
        table = np.array([self.weekday, self.saturday, self.sunday], dtype=np.float64)
        row = np.where(weekday < 5, 0, np.where(weekday == 5, 1, 2))
        return np.asarray(table[row, hour])


@dataclass(frozen=True)
class Surface:
    """An opaque envelope element: area [m²] and U-value [W/(m²·K)]."""

    area: float
    u_value: float

    @property
    def conductance(self) -> float:
        """U A [W/K]."""
        return self.area * self.u_value


@dataclass(frozen=True)
class Glazing:
    """Glazing on one façade (or a rooflight with ``tilt`` 0).

    ``facing`` [deg from north], ``area`` [m², including frame], ``u_value``
    [W/(m²·K)], ``g_value`` [1] total solar energy transmittance at normal
    incidence, ``frame_fraction`` [1], ``shading`` [1] the share of sun that
    external shading and obstructions let through, ``tilt`` [deg].
    """

    facing: float
    area: float
    u_value: float
    g_value: float
    frame_fraction: float = 0.25
    shading: float = 1.0
    tilt: float = 90.0

    @property
    def solar_aperture(self) -> float:
        """A_sol = F_sh g F_w (1 - F_F) A [m²], ISO 13790 11.3.3 (F_w = 0.9)."""
        return (
            self.shading
            * self.g_value
            * _GLAZING_CORRECTION
            * (1.0 - self.frame_fraction)
            * self.area
        )


@dataclass(frozen=True)
class People:
    """Occupants: peak ``count``, sensible and latent heat per person [W], CO2 per person [m³/s].

    Defaults: seated, very light work, 70 W sensible and 45 W latent (ASHRAE
    Handbook - Fundamentals, ch. 18 Table 1), CO2 :data:`CO2_PER_PERSON`.
    """

    count: float
    schedule: Schedule
    sensible: float = 70.0
    latent: float = 45.0
    co2: float = CO2_PER_PERSON


@dataclass(frozen=True)
class InternalLoad:
    """Lights or equipment: peak ``power_density`` [W/m² of floor] times a schedule."""

    power_density: float
    schedule: Schedule


@dataclass(frozen=True)
class Heating:
    """Ideal heating on the air node: ``setpoint`` [°C] where the schedule is 1, else ``setback`` [°C].

    ``max_power`` [W]. While it delivers heat the zone's heating point reads true.
    """

    setpoint: float
    setback: float
    schedule: Schedule
    max_power: float


#: Cooling set point while the zone's windows are open [°C]: 90 °F, the IECC 2021 interlock
#: for operable openings [mem].
COOLING_SETPOINT_WINDOWS_OPEN = 32.2


@dataclass(frozen=True)
class Cooling:
    """Ideal mechanical cooling on the air node, where the schedule is 1.

    Holds the air at or below ``setpoint`` [°C] with up to ``max_power`` [W];
    while the controller reports the zone's windows open (its HVAC interlock
    output) the set point rises to ``setpoint_windows_open`` [°C].
    """

    setpoint: float
    schedule: Schedule
    max_power: float
    setpoint_windows_open: float = COOLING_SETPOINT_WINDOWS_OPEN


@dataclass(frozen=True)
class MechanicalVentilation:
    """Outdoor air supplied by an air handler: ``flow`` [m³/s] times the schedule.

    The supply air enters at the outdoor temperature (any tempering shows up
    as heating or cooling load of the zone).
    """

    flow: float
    schedule: Schedule


@dataclass(frozen=True)
class OpeningDetail:
    """What the simulator needs of an opening beyond the site config.

    ``opening_height`` [m] is the vertical extent of the free area (two-way
    stack flow through one opening); ``discharge_coefficient`` [1];
    ``travel_time`` [s] for a full stroke; ``fire_system_position`` [0-1]
    where the fire system drives the opening while ventsup has released it
    (None: it stays where it is); ``height`` [m] the centre above the zone
    floor when the site config does not give it.
    """

    opening_height: float = 1.0
    discharge_coefficient: float = 0.61
    travel_time: float = 60.0
    fire_system_position: float | None = None
    height: float | None = None


@dataclass(frozen=True)
class ZoneModel:
    """One zone's thermal and airflow description (see ``config/demo-building.yaml``)."""

    name: str
    floor_area: float
    volume: float
    height: float
    mass_class: MassClass
    infiltration: float
    walls: Surface | None
    roof: Surface | None
    ground_floor: Surface | None
    glazing: tuple[Glazing, ...]
    people: People | None
    lights: InternalLoad | None
    equipment: InternalLoad | None
    heating: Heating | None
    stratification: Stratification
    wind_height: float
    sensors: Mapping[str, float]
    openings: Mapping[str, OpeningDetail]
    cooling: Cooling | None = None
    ventilation: MechanicalVentilation | None = None
    air_capacity_factor: float = 1.0

    @property
    def conductance_exterior(self) -> float:
        """Σ U A of walls and roof [W/K]."""
        return sum(s.conductance for s in (self.walls, self.roof) if s is not None)

    @property
    def conductance_ground(self) -> float:
        """U A of the floor on the ground [W/K]."""
        return self.ground_floor.conductance if self.ground_floor is not None else 0.0

    @property
    def conductance_glazing(self) -> float:
        """Σ U A of the glazing [W/K]."""
        return sum(g.u_value * g.area for g in self.glazing)

    @property
    def infiltration_flow(self) -> float:
        """Infiltration [m³/s] from the air-change rate."""
        return self.infiltration * self.volume / 3600.0

    def rc_parameters(self) -> RCParameters:
        """The zone's network (:func:`iso13790_parameters`), with the air node's capacity.

        The air node holds ``air_capacity_factor`` times the heat capacity of
        the zone's air (ρ c_p V with 1.2 kg/m³ and 1005 J/(kg·K)); furnishings
        add to it.
        """
        return iso13790_parameters(
            self.floor_area,
            self.mass_class,
            self.conductance_exterior + self.conductance_ground,
            self.conductance_glazing,
            capacity_air=self.air_capacity_factor * 1.2 * _SPECIFIC_HEAT_AIR * self.volume,
        )

    def opaque_exterior_temperature(
        self, temp_outdoor: FloatArray, temp_ground: float
    ) -> FloatArray:
        """θ_e,op [°C]: outdoor air and ground weighted by their conductances."""
        exterior, ground = self.conductance_exterior, self.conductance_ground
        if exterior + ground == 0.0:
            return np.asarray(temp_outdoor, dtype=np.float64)
        return np.asarray((exterior * temp_outdoor + ground * temp_ground) / (exterior + ground))


@dataclass(frozen=True)
class Reporting:
    """How the site's gateways publish the points the simulator plays.

    ``resolution`` [SI, by point kind]: a reading is rounded to a multiple of
    it before it is published (a kind not listed: not rounded). With
    ``on_change`` a point is published when its published value would differ
    from the last one it published, and otherwise once ``repeat`` [s] has
    passed since then (report by exception with a periodic report, common
    practice for MQTT gateways and BACnet change-of-value subscriptions);
    without it, every step. Points that share a topic are one message: all of
    them go out whenever one is due. The default publishes every step,
    unrounded.
    """

    on_change: bool = False
    repeat: float = math.inf
    resolution: Mapping[PointKind, float] = field(default_factory=dict)


#: The point kinds a resolution may be given for, and how it is written: in the
#: kind's own quantity, a temperature as a difference; humidity (no unit
#: quantity of its own, % RH) as a relative humidity. Binary points: none.
_RESOLUTION_QUANTITY: dict[PointKind, str] = {
    kind: {"temperature": "temperature_delta"}.get(kind.quantity, kind.quantity)
    if kind.quantity is not None
    else "relative_humidity"
    for kind in PointKind
    if kind is not PointKind.BINARY
}


@dataclass(frozen=True)
class Building:
    """The simulator's description of a building's thermal side, zone by zone.

    ``terrain`` around the site (wind profile); ``station_height`` [m] of the
    site's rooftop anemometer (the wind speed point reads the wind there);
    ``ground_albedo`` [1]; ``co2_outdoor`` [ppm]; ``ground_temperature`` [°C]
    under ground floors (None: the mean outdoor temperature of the run);
    ``reporting``: how the points are published (:class:`Reporting`).
    """

    name: str
    zones: Mapping[str, ZoneModel]
    terrain: Terrain = Terrain.SUBURBAN
    station_height: float = 10.0
    ground_albedo: float = 0.2
    co2_outdoor: float = 420.0
    ground_temperature: float | None = None
    schedules: Mapping[str, Schedule] = field(default_factory=dict)
    reporting: Reporting = field(default_factory=Reporting)


def solar_gains(
    zone: ZoneModel,
    zenith: FloatArray,
    solar_azimuth: FloatArray,
    dni: FloatArray,
    dhi: FloatArray,
    ghi: FloatArray,
    albedo: float,
) -> FloatArray:
    """Solar gains through the zone's glazing [W]: Σ A_sol I_plane (ISO 13790 11.3).

    The irradiance on each façade is the isotropic-sky sum of
    :func:`simulator.solar.plane_irradiance`; long-wave losses to the sky are
    left out.
    """
    total = np.zeros_like(np.asarray(ghi, dtype=np.float64))
    for pane in zone.glazing:
        irradiance = plane_irradiance(
            pane.tilt, pane.facing, zenith, solar_azimuth, dni, dhi, ghi, albedo
        )
        total = total + pane.solar_aperture * irradiance
    return np.asarray(total)


# --------------------------------------------------------------------------- loading


def load_building(path: str | os.PathLike[str], site_config: SiteConfig) -> Building:
    """Read a building description (YAML) and check it against the site.

    Raises
    ------
    BuildingError
        With every problem found, each as ``file:line key.path: got ..., expected ...``.
    """
    file = os.fspath(path)
    try:
        text = Path(file).read_text(encoding="utf-8")
    except OSError as exc:
        reason = (exc.strerror or str(exc)).lower()
        raise BuildingError(
            [_problem(file, f"cannot read the building file: {reason}; check the path")]
        ) from None
    return parse_building(text, file, site_config)


def _problem(file: str, message: str) -> ConfigProblem:
    return ConfigProblem(file, None, "", message)


_TOP = ("building", "schedules", "zones", "reporting")
_BUILDING_KEYS = (
    "name",
    "terrain",
    "weather_station_height",
    "ground_albedo",
    "co2_outdoor",
    "ground_temperature",
)
_ZONE_REQUIRED = ("floor_area", "volume", "height", "thermal_mass")
_ZONE_OPTIONAL = (
    "infiltration",
    "envelope",
    "glazing",
    "people",
    "lights",
    "equipment",
    "heating",
    "cooling",
    "mechanical_ventilation",
    "stratification",
    "wind_height",
    "air_capacity_factor",
    "sensors",
    "openings",
)


def parse_building(text: str, file: str, site_config: SiteConfig) -> Building:
    """Parse a building description given as YAML text; ``file`` names it in errors."""
    reader = FileReader(text, file)
    if reader.data is None:
        reader.finish(BuildingError)
        reader.fail(
            BuildingError, "the file is empty, expected the keys building, schedules, zones"
        )
    top = reader.mapping(
        (), reader.data, required=("building", "zones"), optional=("schedules", "reporting")
    )
    if top is None:
        reader.finish(BuildingError)
        raise AssertionError("unreachable")
    head = reader.mapping(("building",), top.get("building", {}), optional=_BUILDING_KEYS) or {}
    name = reader.text(("building", "name"), head.get("name", "building"), "a name") or "building"
    terrain = Terrain.SUBURBAN
    if "terrain" in head:
        choice = reader.choice(("building", "terrain"), head["terrain"], [t.value for t in Terrain])
        terrain = Terrain(choice) if choice else terrain

    def quantity(path: tuple[Any, ...], raw: object, kind: str, **bounds: float) -> float:
        value = reader.quantity(path, raw, kind, **bounds)
        return math.nan if value is None else value

    station = quantity(
        ("building", "weather_station_height"),
        head.get("weather_station_height", 10.0),
        "length",
        above=0.0,
    )
    albedo = quantity(
        ("building", "ground_albedo"), head.get("ground_albedo", 0.2), "fraction", maximum=1.0
    )
    co2 = quantity(("building", "co2_outdoor"), head.get("co2_outdoor", 420.0), "concentration")
    ground = None
    if head.get("ground_temperature") is not None:
        ground = quantity(
            ("building", "ground_temperature"), head["ground_temperature"], "temperature"
        )

    schedules: dict[str, Schedule] = {}
    raw_schedules = reader.mapping(("schedules",), top.get("schedules", {}), any_keys=True) or {}
    for key, raw in raw_schedules.items():
        schedule = _schedule(reader, ("schedules", key), str(key), raw)
        if schedule is not None:
            schedules[str(key)] = schedule

    zones: dict[str, ZoneModel] = {}
    raw_zones = {}
    if "zones" in top:
        raw_zones = reader.mapping(("zones",), top["zones"], any_keys=True) or {}
    for key, raw in raw_zones.items():
        path = ("zones", key)
        if key not in site_config.zones:
            reader.report(
                path,
                f"zone {key!r} is not in the site config; expected one of "
                f"{', '.join(site_config.zones)}",
            )
            continue
        zone = _zone(reader, path, str(key), raw, schedules, site_config, quantity)
        if zone is not None:
            zones[str(key)] = zone
    for zone_name in site_config.zones:
        if "zones" in top and zone_name not in raw_zones:
            reader.report(("zones",), f"missing zone {zone_name!r} of the site config")
    reporting = _reporting(reader, top.get("reporting"), site_config)
    reader.finish(BuildingError)
    return Building(
        name=name,
        zones=MappingProxyType(zones),
        terrain=terrain,
        station_height=station,
        ground_albedo=albedo,
        co2_outdoor=co2,
        ground_temperature=ground,
        schedules=MappingProxyType(schedules),
        reporting=reporting,
    )


def _reporting(reader: FileReader, raw: object, site_config: SiteConfig) -> Reporting:
    """The ``reporting`` section (absent: every step, unrounded)."""
    if raw is None:
        return Reporting()
    path: tuple[Any, ...] = ("reporting",)
    spec = reader.mapping(path, raw, optional=("on_change", "repeat", "resolution"))
    if spec is None:
        return Reporting()
    on_change = spec.get("on_change", False)
    if not isinstance(on_change, bool):
        reader.got((*path, "on_change"), on_change, "true or false")
        on_change = False
    repeat = math.inf
    if on_change and "repeat" not in spec:
        reader.report(
            path,
            "on_change needs repeat (how often an unchanged value is published again, "
            "such as '4 min'), or the controller would see a steady value go stale",
        )
    elif "repeat" in spec:
        value = reader.quantity((*path, "repeat"), spec["repeat"], "duration", above=0.0)
        if value is not None:
            repeat = value
            # The controller holds a sample while t - t_sample <= stale_after; a steady
            # value goes out again at the first step at least `repeat` after the last
            # report, so every decision before it sees it younger than `repeat`.
            tightest = min(site_config.points.items(), key=lambda item: item[1].stale_after)
            if repeat > tightest[1].stale_after:
                reader.got(
                    (*path, "repeat"),
                    spec["repeat"],
                    f"at most {tightest[1].stale_after:g} s: point {tightest[0]!r} goes stale "
                    "after that long without a new value",
                )
    resolution: dict[PointKind, float] = {}
    raw_resolution = reader.mapping(
        (*path, "resolution"),
        spec.get("resolution", {}),
        optional=tuple(kind.value for kind in _RESOLUTION_QUANTITY),
    )
    kinds = {kind.value: kind for kind in _RESOLUTION_QUANTITY}
    for key, value in (raw_resolution or {}).items():
        kind = kinds.get(key)
        if kind is None:  # reported as an unknown key
            continue
        number = reader.quantity(
            (*path, "resolution", key), value, _RESOLUTION_QUANTITY[kind], above=0.0
        )
        if number is not None:
            resolution[kind] = number
    return Reporting(on_change, repeat, MappingProxyType(resolution))


def _schedule(reader: FileReader, path: tuple[Any, ...], name: str, raw: object) -> Schedule | None:
    days = reader.mapping(path, raw, required=("weekday",), optional=("saturday", "sunday"))
    if days is None:
        return None
    profiles: dict[str, tuple[float, ...]] = {}
    # Saturday defaults to the weekday profile, Sunday to Saturday's.
    fallback = {"weekday": "weekday", "saturday": "weekday", "sunday": "saturday"}
    for day in ("weekday", "saturday", "sunday"):
        source = day
        while source not in days and source != "weekday":
            source = fallback[source]
        values = days.get(source)
        day_path = (*path, source)
        if (
            not isinstance(values, list)
            or len(values) != 24
            or not all(
                isinstance(v, int | float) and not isinstance(v, bool) and 0 <= v <= 1
                for v in values
            )
        ):
            reader.got(day_path, values, "a list of 24 hourly fractions from 0 to 1")
            return None
        profiles[day] = tuple(float(v) for v in values)
    return Schedule(name, profiles["weekday"], profiles["saturday"], profiles["sunday"])


def _zone(
    reader: FileReader,
    path: tuple[Any, ...],
    name: str,
    raw: object,
    schedules: Mapping[str, Schedule],
    site_config: SiteConfig,
    quantity: Any,
) -> ZoneModel | None:
    spec = reader.mapping(path, raw, required=_ZONE_REQUIRED, optional=_ZONE_OPTIONAL)
    if spec is None:
        return None
    site_zone = site_config.zones[name]
    floor_area = quantity((*path, "floor_area"), spec.get("floor_area", 1.0), "area", above=0.0)
    volume = quantity((*path, "volume"), spec.get("volume", 1.0), "volume", above=0.0)
    height = quantity((*path, "height"), spec.get("height", 1.0), "length", above=0.0)
    mass_name = reader.choice(
        (*path, "thermal_mass"), spec.get("thermal_mass"), [m.value for m in MassClass]
    )
    infiltration = quantity(
        (*path, "infiltration"), spec.get("infiltration", 0.3), "air_changes", minimum=0.0
    )

    envelope = reader.mapping(
        (*path, "envelope"), spec.get("envelope", {}), optional=("walls", "roof", "ground_floor")
    )
    surfaces: dict[str, Surface | None] = {"walls": None, "roof": None, "ground_floor": None}
    for part in surfaces:
        if envelope is None or part not in envelope:
            continue
        part_path = (*path, "envelope", part)
        item = reader.mapping(part_path, envelope[part], required=("area", "u_value"))
        if item is not None:
            surfaces[part] = Surface(
                quantity((*part_path, "area"), item.get("area", 0.0), "area", minimum=0.0),
                quantity((*part_path, "u_value"), item.get("u_value", 0.0), "u_value", minimum=0.0),
            )

    glazing: list[Glazing] = []
    panes = reader.sequence((*path, "glazing"), spec.get("glazing", []), "glazing mappings") or []
    for index, item in enumerate(panes):
        pane_path = (*path, "glazing", index)
        pane = reader.mapping(
            pane_path,
            item,
            required=("facing", "area", "u_value", "g_value"),
            optional=("frame_fraction", "shading", "tilt"),
        )
        if pane is None:
            continue
        glazing.append(
            Glazing(
                facing=quantity(
                    (*pane_path, "facing"),
                    pane.get("facing", 0.0),
                    "angle",
                    minimum=0.0,
                    maximum=360.0,
                ),
                area=quantity((*pane_path, "area"), pane.get("area", 0.0), "area", minimum=0.0),
                u_value=quantity(
                    (*pane_path, "u_value"), pane.get("u_value", 0.0), "u_value", minimum=0.0
                ),
                g_value=quantity(
                    (*pane_path, "g_value"), pane.get("g_value", 0.0), "fraction", maximum=1.0
                ),
                frame_fraction=quantity(
                    (*pane_path, "frame_fraction"),
                    pane.get("frame_fraction", 0.25),
                    "fraction",
                    maximum=1.0,
                ),
                shading=quantity(
                    (*pane_path, "shading"), pane.get("shading", 1.0), "fraction", maximum=1.0
                ),
                tilt=quantity(
                    (*pane_path, "tilt"),
                    pane.get("tilt", 90.0),
                    "angle",
                    minimum=0.0,
                    maximum=180.0,
                ),
            )
        )

    def schedule_ref(item_path: tuple[Any, ...], raw_name: object) -> Schedule | None:
        if not isinstance(raw_name, str) or raw_name not in schedules:
            known = ", ".join(schedules) or "none defined"
            reader.got(item_path, raw_name, f"the name of a schedule under 'schedules' ({known})")
            return None
        return schedules[raw_name]

    people = None
    if "people" in spec:
        p_path = (*path, "people")
        item = reader.mapping(
            p_path,
            spec["people"],
            required=("count", "schedule"),
            optional=("sensible", "latent", "co2"),
        )
        if item is not None:
            schedule = schedule_ref((*p_path, "schedule"), item.get("schedule"))
            count = quantity((*p_path, "count"), item.get("count", 0), "number", minimum=0.0)
            sensible = quantity(
                (*p_path, "sensible"), item.get("sensible", 70.0), "power", minimum=0.0
            )
            latent = quantity((*p_path, "latent"), item.get("latent", 45.0), "power", minimum=0.0)
            if schedule is not None:
                people = People(count, schedule, sensible, latent)

    loads: dict[str, InternalLoad | None] = {"lights": None, "equipment": None}
    for part in loads:
        if part not in spec:
            continue
        l_path = (*path, part)
        item = reader.mapping(l_path, spec[part], required=("power_density", "schedule"))
        if item is None:
            continue
        schedule = schedule_ref((*l_path, "schedule"), item.get("schedule"))
        density = quantity(
            (*l_path, "power_density"), item.get("power_density", 0.0), "power_density", minimum=0.0
        )
        if schedule is not None:
            loads[part] = InternalLoad(density, schedule)

    heating = None
    if "heating" in spec:
        h_path = (*path, "heating")
        item = reader.mapping(
            h_path, spec["heating"], required=("setpoint", "setback", "schedule", "max_power")
        )
        if item is not None:
            schedule = schedule_ref((*h_path, "schedule"), item.get("schedule"))
            setpoint = quantity((*h_path, "setpoint"), item.get("setpoint", 20.0), "temperature")
            setback = quantity((*h_path, "setback"), item.get("setback", 15.0), "temperature")
            power = quantity(
                (*h_path, "max_power"), item.get("max_power", 0.0), "power", minimum=0.0
            )
            if schedule is not None:
                heating = Heating(setpoint, setback, schedule, power)

    cooling = None
    if "cooling" in spec:
        c_path = (*path, "cooling")
        item = reader.mapping(
            c_path,
            spec["cooling"],
            required=("setpoint", "schedule", "max_power"),
            optional=("setpoint_windows_open",),
        )
        if item is not None:
            schedule = schedule_ref((*c_path, "schedule"), item.get("schedule"))
            setpoint = quantity((*c_path, "setpoint"), item.get("setpoint", 26.0), "temperature")
            opened = quantity(
                (*c_path, "setpoint_windows_open"),
                item.get("setpoint_windows_open", COOLING_SETPOINT_WINDOWS_OPEN),
                "temperature",
            )
            power = quantity(
                (*c_path, "max_power"), item.get("max_power", 0.0), "power", minimum=0.0
            )
            if schedule is not None:
                cooling = Cooling(setpoint, schedule, power, opened)

    ventilation = None
    if "mechanical_ventilation" in spec:
        v_path = (*path, "mechanical_ventilation")
        item = reader.mapping(v_path, spec["mechanical_ventilation"], required=("flow", "schedule"))
        if item is not None:
            schedule = schedule_ref((*v_path, "schedule"), item.get("schedule"))
            flow = quantity((*v_path, "flow"), item.get("flow", 0.0), "flow", minimum=0.0)
            if schedule is not None:
                ventilation = MechanicalVentilation(flow, schedule)

    stratification = Stratification()
    if "stratification" in spec:
        s_path = (*path, "stratification")
        item = reader.mapping(
            s_path,
            spec["stratification"],
            optional=("plume_share", "mixing_air_changes", "max_gradient"),
        )
        if item is not None:
            stratification = Stratification(
                plume_share=quantity(
                    (*s_path, "plume_share"), item.get("plume_share", 0.5), "fraction", maximum=1.0
                ),
                mixing_air_changes=quantity(
                    (*s_path, "mixing_air_changes"),
                    item.get("mixing_air_changes", 2.0),
                    "air_changes",
                    minimum=0.0,
                ),
                max_gradient=quantity(
                    (*s_path, "max_gradient"),
                    item.get("max_gradient", 1.0),
                    "gradient",
                    minimum=0.0,
                ),
            )

    air_factor = quantity(
        (*path, "air_capacity_factor"), spec.get("air_capacity_factor", 1.0), "number", minimum=0.0
    )
    wind_height = quantity(
        (*path, "wind_height"), spec.get("wind_height", height), "length", above=0.0
    )

    sensors: dict[str, float] = {}
    raw_sensors = reader.mapping((*path, "sensors"), spec.get("sensors", {}), any_keys=True) or {}
    zone_sensors = site_zone.temperature.sensors
    for sensor, raw_height in raw_sensors.items():
        if sensor not in zone_sensors:
            reader.report(
                (*path, "sensors", sensor),
                f"{sensor!r} is not a temperature sensor of zone {name!r}; expected one of "
                f"{', '.join(zone_sensors)}",
            )
            continue
        sensors[str(sensor)] = quantity(
            (*path, "sensors", sensor), raw_height, "length", minimum=0.0
        )
    for sensor in zone_sensors:
        sensors.setdefault(sensor, min(1.5, 0.5 * height) if height == height else 1.5)

    openings: dict[str, OpeningDetail] = {}
    raw_openings = (
        reader.mapping((*path, "openings"), spec.get("openings", {}), any_keys=True) or {}
    )
    for opening, raw_detail in raw_openings.items():
        o_path = (*path, "openings", opening)
        if opening not in site_zone.openings:
            reader.report(
                o_path,
                f"{opening!r} is not an opening of zone {name!r}; expected one of "
                f"{', '.join(site_zone.openings)}",
            )
            continue
        item = reader.mapping(
            o_path,
            raw_detail,
            optional=(
                "opening_height",
                "discharge_coefficient",
                "travel_time",
                "fire_system_position",
                "height",
            ),
        )
        if item is None:
            continue
        fire = None
        if item.get("fire_system_position") is not None:
            fire = quantity(
                (*o_path, "fire_system_position"),
                item["fire_system_position"],
                "fraction",
                minimum=0.0,
                maximum=1.0,
            )
        centre = None
        if item.get("height") is not None:
            centre = quantity((*o_path, "height"), item["height"], "length", minimum=0.0)
        openings[str(opening)] = OpeningDetail(
            opening_height=quantity(
                (*o_path, "opening_height"), item.get("opening_height", 1.0), "length", above=0.0
            ),
            discharge_coefficient=quantity(
                (*o_path, "discharge_coefficient"),
                item.get("discharge_coefficient", 0.61),
                "number",
                above=0.0,
                maximum=1.0,
            ),
            travel_time=quantity(
                (*o_path, "travel_time"), item.get("travel_time", 60.0), "duration", above=0.0
            ),
            fire_system_position=fire,
            height=centre,
        )
    for opening, site_opening in site_zone.openings.items():
        detail = openings.setdefault(opening, OpeningDetail())
        if site_opening.height is None and detail.height is None:
            reader.report(
                (*path, "openings"),
                f"opening {opening!r} has no height in the site config; give "
                f"openings.{opening}.height (its centre above the zone floor)",
            )

    if mass_name is None:
        return None
    zone = ZoneModel(
        name=name,
        floor_area=floor_area,
        volume=volume,
        height=height,
        mass_class=MassClass(mass_name),
        infiltration=infiltration,
        walls=surfaces["walls"],
        roof=surfaces["roof"],
        ground_floor=surfaces["ground_floor"],
        glazing=tuple(glazing),
        people=people,
        lights=loads["lights"],
        equipment=loads["equipment"],
        heating=heating,
        stratification=stratification,
        wind_height=wind_height,
        sensors=MappingProxyType(sensors),
        openings=MappingProxyType(openings),
        cooling=cooling,
        ventilation=ventilation,
        air_capacity_factor=air_factor,
    )
    if all(v == v for v in (floor_area, volume, height)):
        try:
            zone.rc_parameters()
        except ValueError as exc:
            reader.report((*path, "envelope"), str(exc))
    return zone
