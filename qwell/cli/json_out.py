"""The JSON contract of the command line: one serialiser per result type.

Each function turns one result object of the Python API into plain
dictionaries, lists, strings and numbers (units in the key names);
:func:`qwell.cli.common.print_json` writes them.  Keys and their order are
part of the contract: scripts read them.
"""

from __future__ import annotations

import math

import numpy as np

from ..levels import compare_methods, depolarised_lines

__all__ = ["material_list_json", "material_json", "layer_profile_json", "profile_json",
           "self_consistent_json", "self_consistent_profile_json", "state_json",
           "miniband_json", "transition_json", "solution_json", "comparison_json", "levels_json",
           "spectrum_json", "size_json", "sweep_json", "monte_carlo_json", "tolerance_json"]


def _finite(v):
    """float(v), or None for None / NaN / inf."""
    return None if v is None or not math.isfinite(v) else float(v)


def _optional(v):
    """float(v), or None for None."""
    return None if v is None else float(v)


# ---------------------------------------------------------------------------
# materials
# ---------------------------------------------------------------------------
def material_list_json(names) -> dict:
    """The names ``qwell materials`` lists."""
    return {"materials": names}


def material_json(material, temperature_K: float) -> dict:
    """One material at a temperature: composition, parameters and their sources."""
    return {"name": material.name, "family": material.family,
            "composition": dict(material.composition), "temperature_K": temperature_K,
            "parameters": material.parameters(), "sources": material.parameter_sources()}


# ---------------------------------------------------------------------------
# profile
# ---------------------------------------------------------------------------
def layer_profile_json(layer) -> dict:
    """One :class:`~qwell.profile.LayerProfile`: extent [nm], strain, edge shifts [eV]."""
    return {"name": layer.label, "material": layer.material, "start_nm": layer.start_nm,
            "end_nm": layer.end_nm, "thickness_nm": layer.thickness_nm,
            "strain_xx": layer.strain_xx, "strain_zz": layer.strain_zz,
            "strain_shift_conduction_eV": layer.strain_shift_conduction_eV,
            "strain_shift_heavy_hole_eV": layer.strain_shift_heavy_hole_eV,
            "strain_shift_light_hole_eV": layer.strain_shift_light_hole_eV,
            "critical_thickness_nm": (None if math.isinf(layer.critical_thickness_nm)
                                      else layer.critical_thickness_nm),
            "warnings": list(layer.warnings)}


def _samples(a) -> list:
    """Profile samples rounded to 1e-9; undefined values (NaN) become null."""
    return [None if not np.isfinite(v) else round(float(v), 9) for v in a]


def profile_json(profile, sc=None) -> dict:
    """A :class:`~qwell.profile.Profile`: band edges [eV] and masses [m0] along z [nm].

    With a self-consistent result ``sc`` the output also holds its summary and
    its potential and carrier densities along z.
    """
    out = {
        "stack": profile.stack.name,
        "temperature_K": profile.stack.temperature_K,
        "field_kV_per_cm": profile.stack.field_kV_per_cm,
        "substrate": profile.stack.substrate,
        "z_nm": _samples(profile.z_nm),
        "conduction_edge_eV": _samples(profile.conduction_edge_eV),
        "heavy_hole_edge_eV": _samples(profile.heavy_hole_edge_eV),
        "light_hole_edge_eV": _samples(profile.light_hole_edge_eV),
        "electron_mass": _samples(profile.electron_mass),
        "heavy_hole_mass": _samples(profile.heavy_hole_mass),
        "light_hole_mass": _samples(profile.light_hole_mass),
        "layers": [layer_profile_json(lay) for lay in profile.layers],
        "band_offsets": profile.band_offsets(),
        "warnings": list(profile.warnings),
    }
    if sc is not None:
        out["self_consistent"] = self_consistent_profile_json(sc)
    return out


# ---------------------------------------------------------------------------
# self-consistent (Schrödinger–Poisson) results
# ---------------------------------------------------------------------------
def self_consistent_json(sc) -> dict:
    """Summary of a :class:`~qwell.selfconsistent.SelfConsistentResult`."""
    ef = sc.fermi_level_eV
    return {"fermi_level_eV": None if ef is None or math.isnan(ef) else float(ef),
            "iterations": int(sc.iterations), "residual_meV": float(sc.residual_meV),
            "charge_residual": float(sc.charge_residual), "converged": bool(sc.converged),
            "sheet_densities_cm2": {k: float(v) for k, v in sc.sheet_densities_cm2.items()},
            "boundary": sc.boundary}


def self_consistent_profile_json(sc) -> dict:
    """The summary plus the potential [eV] and carrier densities [cm^-3] along z [nm]."""
    out = self_consistent_json(sc)
    out.update({"z_nm": sc.z_nm.tolist(), "potential_eV": sc.potential_eV.tolist(),
                "electron_density_cm3": sc.electron_density_cm3.tolist(),
                "hole_density_cm3": sc.hole_density_cm3.tolist()})
    return out


# ---------------------------------------------------------------------------
# states, minibands, transitions, solutions
# ---------------------------------------------------------------------------
def state_json(state, *, wavefunction: bool = False) -> dict:
    """One :class:`~qwell.solvers.results.State` (energy on the band-diagram scale [eV]).

    With ``wavefunction`` (and a computed envelope) it also holds the grid
    ``z_nm``, the envelope ``psi`` [nm^-1/2] and the probability per layer.
    """
    s = state
    out = {"band": s.band, "label": s.label, "index": s.index,
           "energy_eV": float(s.energy_eV), "bound": bool(s.bound),
           "lifetime_s": _optional(s.lifetime_s),
           "tolerance_eV": float(s.tolerance_eV), "converged": bool(s.converged),
           **({"region": s.region} if s.region is not None else {}),
           **({"validity": float(s.validity)} if s.validity is not None else {})}
    if wavefunction and s.psi is not None:
        out["z_nm"] = [round(float(v), 6) for v in s.z_nm]
        out["psi"] = [float(f"{v:.6g}") for v in s.psi]
        out["layer_probability"] = [float(p) for p in s.layer_probability]
    return out


def miniband_json(miniband) -> dict:
    """One :class:`~qwell.solvers.results.Miniband`: edges and width [eV], period [nm]."""
    m = miniband
    return {"band": m.band, "index": m.index, "bottom_eV": m.bottom_eV, "top_eV": m.top_eV,
            "width_eV": m.width_eV, "repeat_index": m.repeat_index, "period_nm": m.period_nm}


def transition_json(transition) -> dict:
    """One :class:`~qwell.optics.Transition` (its ``note`` is not part of the contract)."""
    t = transition
    return {"from": t.initial, "to": t.final, "kind": t.kind,
            "energy_eV": float(t.energy_eV), "wavelength_um": float(t.wavelength_um),
            "wavenumber_cm1": float(t.wavenumber_cm1), "frequency_THz": float(t.frequency_THz),
            "dipole_nm": _optional(t.dipole_nm),
            "oscillator_strength": _optional(t.oscillator_strength),
            "overlap": _optional(t.overlap), "te": _optional(t.te), "tm": _optional(t.tm),
            "strongest": bool(t.strongest)}


def solution_json(solution, transitions=None, *, wavefunctions: bool = False) -> dict:
    """A :class:`~qwell.levels.Solution`: states, transitions, minibands, charge, notes.

    ``transitions`` replaces the solution's own list (e.g. the lines picked
    with ``--transition``); ``wavefunctions`` adds each state's envelope.
    """
    sol = solution
    lines = sol.transitions if transitions is None else transitions
    return {
        "stack": sol.stack.name,
        "temperature_K": sol.stack.temperature_K,
        "method": sol.method,
        "states": [state_json(s, wavefunction=wavefunctions) for s in sol.states],
        "transitions": [transition_json(t) for t in lines],
        "minibands": [miniband_json(m) for b in sol.levels.values() for m in b.minibands],
        "self_consistent": (None if sol.self_consistent is None
                            else self_consistent_json(sol.self_consistent)),
        "notes": list(sol.notes) + [n for b in sol.levels.values() for n in b.notes]
                 + [b.message for b in sol.levels.values() if b.message],
    }


def comparison_json(stack, solutions: dict, transitions: dict) -> dict:
    """Both methods side by side: each solution, and the per-state comparison rows
    of :func:`qwell.levels.compare_methods`."""
    return {"stack": stack.name, "temperature_K": stack.temperature_K, "method": "both",
            "methods": {m: solution_json(sol, transitions[m]) for m, sol in solutions.items()},
            "comparison": compare_methods(solutions["exact"], solutions["semiclassical"])}


def levels_json(stack, solutions: dict, transitions: dict, *, spectrum=None,
                wavefunctions: bool = False) -> dict:
    """The ``qwell levels --json`` document.

    One method: its solution with ``transitions[method]``, the depolarisation-
    shifted lines of a doped stack, each state's envelope (``wavefunctions``)
    and the plotted ``spectrum`` when given.  Two methods:
    :func:`comparison_json`.
    """
    if len(solutions) > 1:
        return comparison_json(stack, solutions, transitions)
    (m, sol), = solutions.items()
    out = solution_json(sol, transitions[m], wavefunctions=wavefunctions)
    if sol.self_consistent is not None:
        out["depolarisation"] = depolarised_lines(sol)
    if spectrum is not None:
        out["spectrum"] = spectrum_json(spectrum)
    return out


def spectrum_json(spec) -> dict:
    """A :class:`~qwell.optics.Spectrum`: absorption (peak 1) against energy and wavelength."""
    return {"energy_eV": spec.energy_eV, "wavelength_um": spec.wavelength_um,
            "absorption": spec.absorption, "linewidth_meV": spec.linewidth_meV,
            "shape": spec.shape, "lines": [t.name for t in spec.lines]}


# ---------------------------------------------------------------------------
# design workflows
# ---------------------------------------------------------------------------
def size_json(res) -> dict:
    """A :class:`~qwell.design.SizeResult`: the sized value and what it gives."""
    return {
        "parameter": res.parameter, "unit": res.unit, "value": res.value,
        "wavelength_um": _finite(res.wavelength_um), "energy_eV": _finite(res.energy_eV),
        "monolayer_options": [{"monolayers": o.monolayers, "thickness_nm": o.thickness_nm,
                               "wavelength_um": _finite(o.wavelength_um)}
                              for o in res.monolayer_options],
        "transition": res.transition, "target_energy_eV": res.target_energy_eV,
        "target_wavelength_um": res.target_wavelength_um,
        "relative_error": _finite(res.relative_error), "bracket": list(res.bracket),
        "evaluations": res.evaluations, "notes": list(res.notes),
    }


def _grid(a) -> list:
    """An array as nested lists, non-finite values as null."""
    a = np.asarray(a, dtype=float)
    return _nulls(np.where(np.isfinite(a), a, np.nan).tolist())


def _nulls(o):
    if isinstance(o, float) and not math.isfinite(o):
        return None
    if isinstance(o, list):
        return [_nulls(v) for v in o]
    return o


def sweep_json(res) -> dict:
    """A :class:`~qwell.design.SweepResult` (1-D: scalars per key; 2-D: lists/maps)."""
    one = len(res.parameters) == 1
    first = res.parameters[0]
    trans = {}
    for t in res.transitions:
        sens = {p: _grid(res.sensitivity[t][p]) for p in res.parameters}
        trans[t] = {"energy_eV": _grid(res.energy_eV[t]),
                    "wavelength_um": _grid(res.wavelength_um[t]),
                    "sensitivity_nm_per_unit": sens[first] if one else sens}
    return {
        "parameter": first if one else list(res.parameters),
        "unit": res.units[0] if one else list(res.units),
        "values": _grid(res.values[0]) if one else [_grid(v) for v in res.values],
        "states": {lab: _grid(res.state_energy_eV[lab]) for lab in res.state_labels},
        "bound": {lab: np.asarray(res.state_bound[lab]).tolist() for lab in res.state_labels},
        "transitions": trans,
        "sensitivity_unit": (res.sensitivity_units[first] if one
                             else dict(res.sensitivity_units)),
        "sensitivity_method": res.sensitivity_method,
        "notes": list(res.notes),
    }


def monte_carlo_json(mc) -> dict:
    """A :class:`~qwell.design.MonteCarloSummary`: wavelength statistics."""
    return {"samples": mc.samples, "valid": mc.valid, "distribution": mc.distribution,
            "sigma": ("tolerance = 1 sigma" if mc.distribution == "normal"
                      else "uniform on ±tolerance"),
            "seed": mc.seed, "mean_um": _finite(mc.mean_um), "std_nm": _finite(mc.std_nm),
            "percentiles_um": {str(k): _finite(v) for k, v in mc.percentiles_um.items()},
            "clipped": mc.clipped, "lost": mc.lost,
            "lost_fraction": (mc.lost / mc.samples) if mc.samples else None,
            "lost_reasons": [{"what": w, "designs": n} for w, n in mc.lost_reasons],
            "percentile_range_um": {str(k): [_finite(lo), _finite(hi)]
                                    for k, (lo, hi) in mc.percentile_range_um.items()},
            "percentiles_over": "all samples; the lost ones ranked at either end give the range",
            "model": "correlated: one draw per composition group and per growth-rate group"}


def tolerance_json(res) -> dict:
    """A :class:`~qwell.design.ToleranceResult`: contributions, worst case, RSS, Monte Carlo."""
    return {
        "transition": res.transition,
        "nominal": {"energy_eV": _finite(res.nominal_energy_eV),
                    "wavelength_um": _finite(res.nominal_wavelength_um)},
        "contributions": [{"parameter": c.parameter, "unit": c.unit, "value": c.value,
                           "delta": c.delta, "spec": c.spec,
                           "wavelength_plus_um": _finite(c.wavelength_plus_um),
                           "wavelength_minus_um": _finite(c.wavelength_minus_um),
                           "contribution_nm": _finite(c.contribution_nm)}
                          for c in res.contributions],
        "groups": [{"name": g.name, "kind": g.kind, "members": list(g.members), "spec": g.spec,
                    "wavelength_plus_um": _finite(g.wavelength_plus_um),
                    "wavelength_minus_um": _finite(g.wavelength_minus_um),
                    "contribution_nm": _finite(g.contribution_nm),
                    "members_sum_nm": _finite(g.members_sum_nm)} for g in res.groups],
        "growth_rate": res.growth_rate,
        "worst_case": {"sum_nm": _finite(res.worst_case_nm),
                       "view": "correlated",
                       "corner_min_um": _finite(res.corner_min_um),
                       "corner_max_um": _finite(res.corner_max_um)},
        "rss_nm": _finite(res.rss_nm),
        "independent": {"worst_case_nm": _finite(res.independent_worst_case_nm),
                        "rss_nm": _finite(res.independent_rss_nm)},
        "monte_carlo": None if res.monte_carlo is None else monte_carlo_json(res.monte_carlo),
        "notes": list(res.notes),
    }
