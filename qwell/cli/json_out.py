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
from ..materials import material_provenance, provenance_json
from ..spectral import line_unit, measures, spread_measures

__all__ = ["material_list_json", "material_json", "library_json", "library_check_json", "layer_profile_json", "profile_json",
           "self_consistent_json", "self_consistent_profile_json", "state_json",
           "miniband_json", "transition_json", "solution_json", "comparison_json", "levels_json",
           "spectrum_json", "design_line_json", "size_json", "sweep_json", "monte_carlo_json", "tolerance_json",
           "phonon_json", "rate_table_json", "radiative_json", "emitter_figure_json",
           "lifetimes_json", "emitter_pairs_json", "absorption_line_json", "absorption_json",
           "pass_absorption_json", "interband_pair_json", "gain_table_json", "gain_spectrum_json",
           "exciton_json"]


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


def material_json(material, temperature_K: float, material_set=None) -> dict:
    """One material at a temperature: composition, parameters, their sources, and the
    provenance of each value (built-in with its citation and from-memory mark, library file
    with path, SHA-256, line and the group's source text, or stack file; what a library value
    replaced), plus the libraries applied in order."""
    libs = material_set.libraries if material_set is not None else ()
    return {"name": material.name, "family": material.family,
            "composition": dict(material.composition), "temperature_K": temperature_K,
            "parameters": material.parameters(), "sources": material.parameter_sources(),
            "provenance": provenance_json(material_provenance(material, material_set)),
            "libraries": [library_json(lib) for lib in libs]}


def library_json(library) -> dict:
    """One applied material library: path, absolute path, SHA-256, name, values defined."""
    return {"path": library.path, "resolved": library.resolved, "sha256": library.sha256,
            "name": library.name, "values": len(library.entries)}


def _issue_json(issue) -> dict:
    return {"file": issue.file, "line": issue.line, "key": issue.key, "message": issue.message}


def library_check_json(check) -> dict:
    """Result of ``qwell materials --check FILE``."""
    return {"path": check.path, "sha256": check.sha256, "usable": check.ok,
            "values": check.defines, "errors": [_issue_json(i) for i in check.errors],
            "warnings": [_issue_json(i) for i in check.warnings]}


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
            "wavelength_nm": measures(t.energy_eV)["wavelength_nm"],
            "energy_meV": measures(t.energy_eV)["energy_meV"],
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
                wavefunctions: bool = False, lifetimes=None) -> dict:
    """The ``qwell levels --json`` document.

    One method: its solution with ``transitions[method]``, the depolarisation-
    shifted lines of a doped stack, each state's envelope (``wavefunctions``),
    the plotted ``spectrum`` and the ``lifetimes`` (:func:`lifetimes_json`) when
    given.  Two methods: :func:`comparison_json`.
    """
    if len(solutions) > 1:
        return comparison_json(stack, solutions, transitions)
    (m, sol), = solutions.items()
    out = solution_json(sol, transitions[m], wavefunctions=wavefunctions)
    if sol.self_consistent is not None:
        out["depolarisation"] = depolarised_lines(sol)
    if spectrum is not None:
        out["spectrum"] = spectrum_json(spectrum)
    if lifetimes is not None:
        out["lifetimes"] = lifetimes_json(lifetimes)
    return out


# ---------------------------------------------------------------------------
# lifetimes
# ---------------------------------------------------------------------------
def phonon_json(ph) -> dict:
    """A :class:`~qwell.lifetimes.LOPhonon`: energy [meV], permittivities, host."""
    return {"energy_meV": 1e3 * ph.energy_eV, "eps_infinity": ph.eps_infinity,
            "eps_static": ph.eps_static, "material": ph.material, "layer": ph.layer,
            "note": ph.note}


def _time_ps(rate_per_s):
    return 1e12 / float(rate_per_s) if rate_per_s > 0 else None


def rate_table_json(r) -> dict:
    """A :class:`~qwell.lifetimes.RateTable`: per state the lifetime [ps] and in-plane mass
    [m0]; per ordered pair the emission and absorption rates [1/s] and the time [ps]
    (null when the rate is zero)."""
    n = len(r.labels)
    return {"band": r.band, "temperature_K": r.temperature_K, "thermal_average": r.thermal,
            "phonon": phonon_json(r.phonon),
            "states": [{"label": lab, "in_plane_mass_m0": float(m),
                        "total_rate_per_s": float(w), "lifetime_ps": _time_ps(w)}
                       for lab, m, w in zip(r.labels, r.in_plane_mass_m0, r.total_per_s)],
            "pairs": [{"from": r.labels[i], "to": r.labels[f],
                       "emission_per_s": float(r.emission_per_s[i, f]),
                       "absorption_per_s": float(r.absorption_per_s[i, f]),
                       "time_ps": _time_ps(r.rate_per_s[i, f])}
                      for i in range(n) for f in range(n) if i != f]}


def radiative_json(x) -> dict:
    """A :class:`~qwell.lifetimes.RadiativeLine`: spontaneous emission of one line."""
    return {"upper": x.upper, "lower": x.lower, "energy_eV": x.energy_eV,
            "wavelength_um": x.wavelength_um, "oscillator_strength": x.oscillator_strength,
            "rate_per_s": x.rate_per_s, "lifetime_ns": _finite(x.lifetime_ns),
            "phonon_time_ps": _finite(x.phonon_time_ps), "refractive_index": x.refractive_index}


def emitter_figure_json(f) -> dict:
    """An :class:`~qwell.lifetimes.EmitterFigure` (non-finite values are null)."""
    return {"upper": f.upper, "lower": f.lower, "energy_eV": _finite(f.energy_eV),
            "wavelength_um": _finite(f.wavelength_um), "dipole_nm": _finite(f.dipole_nm),
            "tau_upper_ps": _finite(f.tau_upper_ps), "tau_lower_ps": _finite(f.tau_lower_ps),
            "tau_upper_lower_ps": _finite(f.tau_upper_lower_ps),
            "inversion_factor_ps": _finite(f.inversion_factor_ps),
            "figure_of_merit_nm2_ps": _finite(f.figure_of_merit_nm2_ps),
            "inversion_possible": bool(f.inversion_possible),
            "linewidth_meV": f.linewidth_meV, "refractive_index": f.refractive_index,
            "period_nm": f.period_nm, "cross_section_cm2": _finite(f.cross_section_cm2),
            "gain_per_current_cm_per_kA": _finite(f.gain_per_current_cm_per_kA),
            "radiative_lifetime_ns": _finite(f.radiative_lifetime_ns), "notes": list(f.notes)}


def lifetimes_json(lt) -> dict:
    """A :class:`~qwell.lifetimes.Lifetimes`: rate table, radiative lines, the emitter line
    and every line's figure of merit."""
    return {"rates": rate_table_json(lt.rates),
            "radiative": [radiative_json(x) for x in lt.radiative],
            "emitter": None if lt.figure is None else emitter_figure_json(lt.figure),
            "lines": [emitter_figure_json(f) for f in lt.figures],
            "notes": list(lt.notes)}


def emitter_pairs_json(pairs):
    """The ``emitter`` pairs of a design point (line name and EMITTER_KEYS values), or None."""
    if not pairs:
        return None
    return {k: (v if k == "line" else _finite(v)) for k, v in pairs}


def spectrum_json(spec) -> dict:
    """A :class:`~qwell.optics.Spectrum`: absorption (peak 1) against energy and wavelength."""
    return {"energy_eV": spec.energy_eV, "wavelength_um": spec.wavelength_um,
            "absorption": spec.absorption, "linewidth_meV": spec.linewidth_meV,
            "shape": spec.shape, "lines": [t.name for t in spec.lines]}


# ---------------------------------------------------------------------------
# design workflows
# ---------------------------------------------------------------------------
def design_line_json(line) -> dict:
    """A :class:`~qwell.design.line.DesignLine`: the followed line, where it comes from, its
    target and whether it is the depolarisation-shifted one."""
    return {"transition": line.transition, "source": line.source, "reason": line.reason,
            "target_eV": line.target_eV, "target": line.target_text,
            "depolarised": line.depolarised}


def size_json(res, unit: str | None = None) -> dict:
    """A :class:`~qwell.design.SizeResult`: the sized value and what it gives.

    Every line carries all its measures (``wavelength_nm``, ``wavelength_um``,
    ``wavenumber_cm1``, ``frequency_THz``, ``energy_meV``); ``photon_unit`` is
    the unit the table shows (``unit``, else the target's spectral region).
    """
    return {
        "parameter": res.parameter, "unit": res.unit, "value": res.value,
        "wavelength_um": _finite(res.wavelength_um), "energy_eV": _finite(res.energy_eV),
        **{k: v for k, v in measures(res.energy_eV).items() if k != "wavelength_um"},
        "monolayer_options": [{"monolayers": o.monolayers, "thickness_nm": o.thickness_nm,
                               "wavelength_um": _finite(o.wavelength_um),
                               "energy_eV": _finite(o.energy_eV),
                               **{k: v for k, v in measures(o.energy_eV).items()
                                  if k != "wavelength_um"},
                               **({"emitter": emitter_pairs_json(o.emitter)}
                                  if res.emitter else {})}
                              for o in res.monolayer_options],
        "transition": res.transition, "target_energy_eV": res.target_energy_eV,
        "target_wavelength_um": res.target_wavelength_um,
        **{k: v for k, v in measures(res.target_energy_eV, "target_").items()
           if k != "target_wavelength_um"},
        "photon_unit": line_unit(res.target_energy_eV, unit),
        "relative_error": _finite(res.relative_error), "bracket": list(res.bracket),
        "evaluations": res.evaluations,
        "depolarised": res.depolarised, "bare_energy_eV": _finite(res.bare_energy_eV),
        "bare_wavelength_um": _finite(res.bare_wavelength_um),
        **({"emitter": emitter_pairs_json(res.emitter),
            "lifetimes_ps": {lab: _finite(t) for lab, t in res.lifetimes_ps}}
           if res.emitter else {}),
        "notes": list(res.notes),
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


def sweep_json(res, unit: str | None = None) -> dict:
    """A :class:`~qwell.design.SweepResult` (1-D: scalars per key; 2-D: lists/maps).

    Each line carries every measure (``wavelength_nm``, ``wavenumber_cm1``,
    ``frequency_THz``, ``energy_meV`` beside ``wavelength_um``) and its
    sensitivity in every spread unit (``sensitivity_per_unit``: nm, um, cm1,
    GHz, meV per engineering step); ``photon_unit`` is the unit of the table.
    """
    one = len(res.parameters) == 1
    first = res.parameters[0]
    trans = {}
    spread_keys = {"nm": "nm", "um": "um", "cm-1": "cm1", "THz": "GHz", "meV": "meV"}
    for t in res.transitions:
        sens = {p: _grid(res.sensitivity[t][p]) for p in res.parameters}
        per = {p: {k: _grid(res.sensitivity_in(t, p, u)) for u, k in spread_keys.items()}
               for p in res.parameters}
        trans[t] = {"energy_eV": _grid(res.energy_eV[t]),
                    "wavelength_um": _grid(res.wavelength_um[t]),
                    "wavelength_nm": _grid(res.line_in(t, "nm")),
                    "wavenumber_cm1": _grid(res.line_in(t, "cm-1")),
                    "frequency_THz": _grid(res.line_in(t, "THz")),
                    "energy_meV": _grid(res.line_in(t, "meV")),
                    "sensitivity_nm_per_unit": sens[first] if one else sens,
                    "sensitivity_per_unit": per[first] if one else per,
                    "depolarised": t in res.bare_energy_eV}
        if t in res.bare_energy_eV:
            trans[t]["bare_energy_eV"] = _grid(res.bare_energy_eV[t])
            trans[t]["bare_wavelength_um"] = _grid(res.bare_wavelength_um[t])
    return {
        "parameter": first if one else list(res.parameters),
        "unit": res.units[0] if one else list(res.units),
        "values": _grid(res.values[0]) if one else [_grid(v) for v in res.values],
        "photon_unit": res.photon_unit(unit),
        "states": {lab: _grid(res.state_energy_eV[lab]) for lab in res.state_labels},
        "bound": {lab: np.asarray(res.state_bound[lab]).tolist() for lab in res.state_labels},
        **({"reference": {"layer": res.reference,
                          "edge_eV": {b: _grid(e) for b, e in res.reference_edge_eV.items()},
                          "states_from_reference_eV": {lab: _grid(res.state_energy_shown(lab))
                                                       for lab in res.state_labels}}}
           if res.reference else {}),
        "transitions": trans,
        "sensitivity_unit": (res.sensitivity_units[first] if one
                             else dict(res.sensitivity_units)),
        "sensitivity_method": res.sensitivity_method,
        **({"emitter": {"line": res.emitter_line,
                        **{k: _grid(v) for k, v in res.emitter.items()},
                        "lifetime_ps": {lab: _grid(v) for lab, v in res.lifetime_ps.items()}}}
           if res.emitter_line is not None else {}),
        "anticrossings": [{"lower": a.lower, "upper": a.upper, "parameter": a.parameter,
                           "unit": a.unit, "value": a.value, "gap_eV": a.gap_eV,
                           "gap_meV": a.gap_meV, "grid_gap_eV": a.grid_gap_eV}
                          for a in res.anticrossings],
        "notes": list(res.notes),
    }


def monte_carlo_json(mc, energy_eV: float | None = None) -> dict:
    """A :class:`~qwell.design.MonteCarloSummary`: wavelength statistics (the standard
    deviation also as ``std_um``, ``std_cm1``, ``std_GHz``, ``std_meV`` at the nominal line
    ``energy_eV``)."""
    std = spread_measures(_finite(mc.std_nm), energy_eV, "std_") if energy_eV else {}
    std.pop("std_nm", None)
    return {"samples": mc.samples, "valid": mc.valid, "distribution": mc.distribution,
            "sigma": ("tolerance = 1 sigma" if mc.distribution == "normal"
                      else "uniform on ±tolerance"),
            "seed": mc.seed, "mean_um": _finite(mc.mean_um), "std_nm": _finite(mc.std_nm),
            **std,
            "percentiles_um": {str(k): _finite(v) for k, v in mc.percentiles_um.items()},
            "clipped": mc.clipped, "lost": mc.lost,
            "lost_fraction": (mc.lost / mc.samples) if mc.samples else None,
            "lost_reasons": [{"what": w, "designs": n} for w, n in mc.lost_reasons],
            "percentile_range_um": {str(k): [_finite(lo), _finite(hi)]
                                    for k, (lo, hi) in mc.percentile_range_um.items()},
            "percentiles_over": "all samples; the lost ones ranked at either end give the range",
            "model": "correlated: one draw per composition group and per growth-rate group"}


def tolerance_json(res, unit: str | None = None) -> dict:
    """A :class:`~qwell.design.ToleranceResult`: contributions, worst case, RSS, Monte Carlo.

    Spreads carry every spread unit (``contribution_nm``, ``contribution_um``,
    ``contribution_cm1``, ``contribution_GHz``, ``contribution_meV``; the same for
    ``sum_*`` and ``rss_*``), linear at the nominal line; ``photon_unit`` is the unit the
    table shows.
    """
    e0 = _finite(res.nominal_energy_eV)

    def spreads(delta_nm, prefix):
        out = spread_measures(_finite(delta_nm), e0, prefix)
        out.pop(f"{prefix}nm")
        return out
    return {
        "transition": res.transition,
        "photon_unit": line_unit(e0, unit),
        "nominal": {"energy_eV": e0, "wavelength_um": _finite(res.nominal_wavelength_um),
                    **{k: v for k, v in measures(e0).items() if k != "wavelength_um"},
                    "bare_energy_eV": _finite(res.bare_energy_eV),
                    "bare_wavelength_um": _finite(res.bare_wavelength_um),
                    "depolarised": res.depolarised},
        "contributions": [{"parameter": c.parameter, "unit": c.unit, "value": c.value,
                           "delta": c.delta, "spec": c.spec,
                           "wavelength_plus_um": _finite(c.wavelength_plus_um),
                           "wavelength_minus_um": _finite(c.wavelength_minus_um),
                           "contribution_nm": _finite(c.contribution_nm),
                           **spreads(c.contribution_nm, "contribution_")}
                          for c in res.contributions],
        "groups": [{"name": g.name, "kind": g.kind, "members": list(g.members), "spec": g.spec,
                    "wavelength_plus_um": _finite(g.wavelength_plus_um),
                    "wavelength_minus_um": _finite(g.wavelength_minus_um),
                    "contribution_nm": _finite(g.contribution_nm),
                    **spreads(g.contribution_nm, "contribution_"),
                    "members_sum_nm": _finite(g.members_sum_nm)} for g in res.groups],
        "growth_rate": res.growth_rate,
        "worst_case": {"sum_nm": _finite(res.worst_case_nm), **spreads(res.worst_case_nm, "sum_"),
                       "view": "correlated",
                       "corner_min_um": _finite(res.corner_min_um),
                       "corner_max_um": _finite(res.corner_max_um)},
        "rss_nm": _finite(res.rss_nm), **spreads(res.rss_nm, "rss_"),
        "independent": {"worst_case_nm": _finite(res.independent_worst_case_nm),
                        **spreads(res.independent_worst_case_nm, "worst_case_"),
                        "rss_nm": _finite(res.independent_rss_nm),
                        **spreads(res.independent_rss_nm, "rss_")},
        "monte_carlo": (None if res.monte_carlo is None
                        else monte_carlo_json(res.monte_carlo, e0)),
        "notes": list(res.notes),
    }


# ---------------------------------------------------------------------------
# absorption, gain, excitons (qwell absorption / qwell gain)
# ---------------------------------------------------------------------------
def absorption_line_json(line) -> dict:
    """One :class:`~qwell.absorption.IntersubbandLine`: energies [eV], peak λ [µm], strength,
    Δn [cm^-2], FWHM [meV], ∫α dE [eV/cm], peak α [cm^-1]."""
    return {"transition": line.name, "energy_eV": line.energy_eV,
            "depolarisation_shift_eV": line.depolarisation_shift_eV,
            "peak_energy_eV": line.peak_energy_eV,
            "peak_wavelength_um": line.peak_wavelength_um,
            "oscillator_strength": line.oscillator_strength, "dipole_nm": line.dipole_nm,
            "population_difference_cm2": line.population_difference_cm2,
            "linewidth_meV": line.linewidth_meV,
            "integrated_absorption_eV_per_cm": line.integrated_eV_per_cm,
            "peak_absorption_cm1": line.peak_absorption_cm1}


def absorption_json(res, *, arrays: bool = True) -> dict:
    """An :class:`~qwell.absorption.IntersubbandAbsorption`: populations, α [cm^-1] peak and
    integral, sum rule, its lines and (``arrays``) the spectrum."""
    frac = res.sum_rule_fraction
    out = {"populations": res.populations,
           "fermi_level_eV": None if math.isnan(res.fermi_level_eV) else res.fermi_level_eV,
           "sheet_densities_cm2": dict(res.sheet_densities_cm2),
           "total_density_cm2": res.total_density_cm2,
           "temperature_K": res.temperature_K,
           "active_length_nm": res.active_length_nm,
           "active_length_rule": res.active_length_rule,
           "refractive_index": res.refractive_index,
           "polarisation": "z (TM)",
           "peak_absorption_cm1": res.peak_absorption_cm1,
           "peak_energy_eV": res.peak_energy_eV,
           "peak_wavelength_um": res.peak_wavelength_um,
           "integrated_absorption_eV_per_cm": res.integrated_eV_per_cm,
           "sum_rule_eV_per_cm": res.sum_rule_eV_per_cm,
           "sum_rule_fraction": None if math.isnan(frac) else frac,
           "lines": [absorption_line_json(ln) for ln in res.lines],
           "notes": list(res.notes)}
    if arrays:
        out["energy_eV"] = res.energy_eV.tolist()
        out["wavelength_um"] = res.wavelength_um.tolist()
        out["absorption_cm1"] = res.absorption_cm1.tolist()
    return out


def pass_absorption_json(geo) -> dict:
    """A :class:`~qwell.absorption.PassAbsorption`: geometry, angle [deg], path factor,
    thickness [nm] and the absorbed fractions at the peak."""
    return {"geometry": geo.geometry, "internal_angle_deg": geo.internal_angle_deg,
            "passes": geo.passes, "path_factor": geo.path_factor,
            "thickness_nm": geo.thickness_nm,
            "peak_absorbed_fraction_per_pass": geo.peak_per_pass,
            "peak_absorbed_fraction_total": geo.peak_total,
            "polarisation": "p (TM); unpolarised light: half"}


def interband_pair_json(pair) -> dict:
    """An :class:`~qwell.gain.InterbandPair`: edge [eV, µm], overlap, TE/TM, masses [m0],
    absorption steps [cm^-1]."""
    return {"pair": pair.name, "edge_eV": pair.edge_eV,
            "edge_wavelength_um": pair.edge_wavelength_um, "overlap": pair.overlap,
            "te": pair.te, "tm": pair.tm, "electron_mass_m0": pair.electron_mass_m0,
            "hole_mass_m0": pair.hole_mass_m0, "reduced_mass_m0": pair.reduced_mass_m0,
            "step_te_cm1": pair.step_te_cm1, "step_tm_cm1": pair.step_tm_cm1}


def gain_table_json(tab, *, arrays: bool = False) -> dict:
    """A :class:`~qwell.gain.GainTable`: the model, peak gain [cm^-1] and quasi-Fermi levels
    [eV] per density [cm^-2], transparency, and (``arrays``) the gain spectra."""
    m = tab.model
    out = {"polarisation": tab.polarisation,
           "linewidth_meV": tab.linewidth_meV,
           "temperature_K": m.temperature_K, "active_length_nm": m.active_length_nm,
           "active_length_rule": m.active_length_rule,
           "refractive_index": m.refractive_index, "kane_energy_eV": m.kane_energy_eV,
           "transparency_density_cm2": _finite(tab.transparency_density_cm2),
           "pairs": [interband_pair_json(p) for p in m.pairs],
           "table": [{"density_cm2": float(d), "peak_gain_cm1": float(g),
                      "peak_energy_eV": float(e), "peak_wavelength_um": float(w),
                      "electron_fermi_eV": _finite(fc), "hole_fermi_eV": _finite(fv),
                      "fermi_separation_eV": _finite(fc - fv)}
                     for d, g, e, w, fc, fv in zip(tab.densities_cm2, tab.peak_gain_cm1,
                                                   tab.peak_energy_eV, tab.peak_wavelength_um,
                                                   tab.electron_fermi_eV, tab.hole_fermi_eV)],
           "notes": list(tab.notes)}
    if arrays:
        out["energy_eV"] = tab.energy_eV.tolist()
        out["gain_te_cm1"] = tab.gain_te_cm1.tolist()
        out["gain_tm_cm1"] = tab.gain_tm_cm1.tolist()
    return out


def gain_spectrum_json(spec, *, arrays: bool = True) -> dict:
    """A :class:`~qwell.gain.GainSpectrum` at one density [cm^-2]: quasi-Fermi levels [eV],
    peak gain [cm^-1], the model's settings and (``arrays``) the spectrum."""
    def fin(v):
        return v if math.isfinite(v) else None
    out = {"density_cm2": spec.density_cm2, "polarisation": spec.polarisation,
           "electron_fermi_eV": fin(spec.electron_fermi_eV),
           "hole_fermi_eV": fin(spec.hole_fermi_eV),
           "fermi_separation_eV": fin(spec.fermi_separation_eV),
           "peak_gain_cm1": spec.peak_gain_cm1, "peak_energy_eV": spec.peak_energy_eV,
           "peak_wavelength_um": spec.peak_wavelength_um,
           "linewidth_meV": spec.linewidth_meV, "temperature_K": spec.temperature_K,
           "active_length_nm": spec.active_length_nm,
           "active_length_rule": spec.active_length_rule,
           "refractive_index": spec.refractive_index, "kane_energy_eV": spec.kane_energy_eV,
           "pairs": [interband_pair_json(p) for p in spec.pairs], "notes": list(spec.notes)}
    if arrays:
        out["energy_eV"] = spec.energy_eV.tolist()
        out["wavelength_um"] = spec.wavelength_um.tolist()
        out["gain_te_cm1"] = spec.gain_te_cm1.tolist()
        out["gain_tm_cm1"] = spec.gain_tm_cm1.tolist()
    return out


def exciton_json(x) -> dict:
    """An :class:`~qwell.excitons.ExcitonBinding`: binding [meV], radius [nm], pair and exciton
    energies [eV], wavelength [µm], reduced mass [m0], dielectric constant."""
    return {"pair": x.name, "binding_meV": x.binding_meV, "radius_nm": x.radius_nm,
            "pair_energy_eV": x.pair_energy_eV,
            "exciton_energy_eV": x.exciton_energy_eV,
            "exciton_wavelength_um": x.exciton_wavelength_um,
            "reduced_mass_m0": x.reduced_mass_m0,
            "dielectric_constant": x.dielectric_constant}
