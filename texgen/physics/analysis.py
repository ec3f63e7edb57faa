"""Physical analysis: matter content, energy conditions, horizons, singularities, causality, clocks.

:func:`analyse` is pure computation on the frozen model and its
:class:`~texgen.engine.Curvature`, memoised per curvature object; each concern
lives in its own module (``matter``, ``energy_conditions``, ``horizons``,
``singularities``, ``causality``, ``clocks``) and this one puts them together in
one frozen :class:`Analysis`.  The report section and the JSON block are built
from it in :mod:`texgen.output.sections.analysis`.
"""
from __future__ import annotations

import weakref
from dataclasses import dataclass, field, replace

import sympy as sp

from . import _tools as tools
from . import causality, clocks, horizons as horizon_tools, singularities
from .chart import SAMPLES, SEED, parameter_point, radial_coordinate, time_index
from .energy_conditions import CONDITIONS, Verdict, decide_conditions
from .matter import frame_matter, stress_energy
from .clocks import clock_rate_difference

__all__ = ["Analysis", "CONDITIONS", "SAMPLES", "SEED", "Verdict", "analyse", "clock_rate_difference"]


@dataclass(frozen=True)
class Analysis:
    """Results of the physical analysis of one spacetime."""

    stress_energy: sp.ImmutableMatrix
    """T_ab (covariant)."""
    stress_energy_mixed: sp.ImmutableMatrix
    """T^a_b."""
    frame: sp.ImmutableMatrix | None
    """Rows e_(i)^a (upper index) of the orthonormal frame used, or None."""
    frame_kind: str | None
    """``static``, ``zamo``, ``eulerian`` (normal observers of t = const), ``tetrad`` or None."""
    frame_components: sp.ImmutableMatrix | None
    """T_(i)(j) in that frame."""
    energy_density: sp.Expr | None
    pressures: tuple[sp.Expr, ...]
    """Principal pressures p_i (frame order), when T is diagonal in the frame."""
    hawking_ellis_type: str
    """``vacuum``, ``I``, ``I (at samples)``, ``not I at samples`` or ``unknown``."""
    energy_conditions: dict
    """``null``/``weak``/``strong``/``dominant`` -> :class:`Verdict`."""
    radial: sp.Symbol | None
    horizon_function: sp.Expr | None
    horizons: tuple[sp.Expr, ...]
    """Radii where the horizon function vanishes, outermost first."""
    horizons_numeric: tuple[float, ...]
    """The radii at the sample parameter values :attr:`parameter_point` (also when no closed form)."""
    parameter_point: dict
    naked_condition: sp.Basic | None
    """Condition on the parameters under which there is no horizon."""
    ergosurfaces: tuple[sp.Expr, ...]
    curvature_singularities: tuple[sp.Basic, ...]
    """Equations (sympy ``Eq``) where the Kretschmann scalar's denominator vanishes."""
    coordinate_singularities: tuple[sp.Basic, ...]
    """Equations where a metric component blows up while the invariants stay finite."""
    parameter_degeneracies: tuple[sp.Basic, ...]
    """Equations in the parameters alone where a curvature or metric denominator vanishes (no place in spacetime)."""
    curvature_limits: dict
    """Description (``r -> 0``) -> limit of the Kretschmann scalar there."""
    surface_gravities: tuple[sp.Expr | None, ...]
    """Signed κ per horizon (negative where the lapse squared decreases outwards)."""
    surface_gravity_forms: tuple[sp.Expr | None, ...]
    """κ as a function of the radial coordinate at the horizon (a parameter eliminated with H = 0), or None."""
    hawking_temperatures: tuple[sp.Expr | None, ...]
    ctc_regions: dict
    """Periodic coordinate name -> description of where its Killing vector is timelike."""
    null_directions: tuple[sp.Expr, ...]
    """Radial null directions dr/dt in the t–r plane."""
    cone_tilt: str | None
    """Where the light cones tip over (both radial null directions on one side)."""
    clock_rate: sp.Expr | None
    """dτ/dt of static observers."""
    static_region: str | None
    orbit_angular_velocity: sp.Expr | None
    """Ω² of circular equatorial orbits (spherical symmetry)."""
    orbit_clock_rate: sp.Expr | None
    photon_sphere: sp.Expr | None
    isco: sp.Expr | None
    notes: tuple[str, ...] = field(default_factory=tuple)
    """What could not be done, in words."""


_CACHE: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()


def analyse(spacetime, curvature) -> Analysis:
    """The physical analysis of ``spacetime`` (memoised per curvature object).

    Parameters
    ----------
    spacetime:
        The frozen model.
    curvature:
        Its :class:`texgen.engine.Curvature`.

    Raises :class:`~texgen.errors.ConfigError` for a bad ``tetrad`` or ``structure``
    section and :class:`~texgen.errors.DerivationError` when the field tensor cannot be computed.
    """
    try:
        cached = _CACHE.get(curvature)
    except TypeError:
        cached = None
    if cached is not None and cached[0] is spacetime:
        return cached[1]
    result = _analyse(spacetime, curvature)
    try:
        _CACHE[curvature] = (spacetime, result)
    except TypeError:
        pass
    return result


def _analyse(st, cv) -> Analysis:
    notes: list[str] = []
    se = stress_energy(st, cv)
    radial = radial_coordinate(st)
    ppoint = parameter_point(st)
    stand_ins = tools.positive_stand_ins(st)
    ti = time_index(st)
    fm = frame_matter(st, cv, se, ti)
    hz = horizon_tools.find_horizons(st, cv, radial, ppoint, ti, notes)
    ec, he_type = decide_conditions(st, cv, se, fm, radial, hz.special, stand_ins, ppoint, ti, notes)
    naked = horizon_tools.naked_condition(hz.function, radial)
    ergos = horizon_tools.ergosurfaces(st, cv, radial, hz.radii, ppoint, ti)
    sing = singularities.classify(st, cv, radial, ppoint, notes)
    kappas, kappa_forms, temps = horizon_tools.surface_gravities(st, cv, radial, hz.radii, ppoint, hz.function)
    ctc = causality.ctc_regions(st, cv, radial, ppoint, stand_ins, hz.special, ti)
    nulls, tilt = causality.radial_light_cones(st, cv, radial, ppoint, ti)
    clock, static_region, omega2, orbit_rate, photon, isco = clocks.static_clocks(
        st, cv, radial, ppoint, hz.radii, hz.numeric, ti, notes)

    # Back from Tw to T: positive constant factors change no sign, so verdicts stand.
    comps, rho, ps, scale = fm.components, fm.density, fm.pressures, se.scale
    if scale != 1:
        comps = comps.applyfunc(lambda x: x * scale) if comps is not None else None
        rho = rho * scale if rho is not None else None
        ps = tuple(x * scale for x in ps)
        ec = {k: replace(v, inequalities=tuple(x * scale for x in v.inequalities)) for k, v in ec.items()}
    return Analysis(
        stress_energy=se.T, stress_energy_mixed=se.mixed, frame=fm.frame, frame_kind=fm.kind,
        frame_components=comps, energy_density=rho, pressures=ps, hawking_ellis_type=he_type,
        energy_conditions=ec, radial=radial, horizon_function=hz.function, horizons=tuple(hz.radii),
        horizons_numeric=tuple(hz.numeric), parameter_point=ppoint, naked_condition=naked,
        ergosurfaces=tuple(ergos), curvature_singularities=tuple(sing.curvature),
        coordinate_singularities=tuple(sing.coordinate), parameter_degeneracies=tuple(sing.degenerate),
        curvature_limits=sing.limits, surface_gravities=kappas, surface_gravity_forms=kappa_forms,
        hawking_temperatures=temps, ctc_regions=ctc, null_directions=nulls, cone_tilt=tilt, clock_rate=clock,
        static_region=static_region, orbit_angular_velocity=omega2, orbit_clock_rate=orbit_rate,
        photon_sphere=photon, isco=isco, notes=tuple(notes))
