"""The lumped line model against conservation laws, closed-form solutions and a PDE reference."""
from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from optimizer.config import load_plant
from optimizer.line import LineModel, ModelParameters, ProductTables, ReflectionRelation
from optimizer.line.model import CORE, COLD, HOT, MASS_SHARES, lambert_field_weights
from optimizer.properties import penetration_depth_m

ROOT = Path(__file__).resolve().parents[1]
PLANT, _ = load_plant(ROOT / "configs" / "demo.toml")
TEMPERING_LINE = PLANT.line("TMP-1")
DRYER = PLANT.line("DRY-1")
PORK = PLANT.product("PORK-SHLDR-BLK")
FUSILLI = PLANT.product("FUSILLI-DRY")


def tempering_model(**params) -> LineModel:
    base = ModelParameters.defaults(TEMPERING_LINE, PORK)
    return LineModel(TEMPERING_LINE, PORK, base.with_values(**params) if params else base)


def single_zone_line(line, zone_length_m=1.0, rating_kw=100.0):
    return dataclasses.replace(line, zone_length_m=(zone_length_m,), zone_max_kw=(rating_kw,),
                               total_power_cap_kw=rating_kw, infeed_choke_m=0.0, outfeed_choke_m=0.0,
                               belt_speed_min_m_per_min=0.01)


def constant_property_tables(tables: ProductTables, *, c_j_per_kg_k, k_w_per_m_k, rho_kg_per_m3,
                             eps_prime, eps_loss) -> ProductTables:
    """Tables of a fictitious product with constant properties (for closed-form references)."""
    x = tables.water_db
    t = tables.temp_grid_c
    return dataclasses.replace(
        tables, enthalpy_grid=(1 + x) * c_j_per_kg_k * (t + 40.0),
        heat_capacity_grid=np.full_like(t, (1 + x) * c_j_per_kg_k),
        eps_prime_table=np.full((1, t.size), eps_prime), eps_loss_table=np.full((1, t.size), eps_loss),
        conductivity_table=np.full((1, t.size), k_w_per_m_k), density_kg_per_m3=rho_kg_per_m3)


# ----------------------------------------------------------------------------- first law

@pytest.mark.parametrize("case", ["tempering", "drying"])
def test_absorbed_energy_equals_enthalpy_rise_plus_losses(case):
    # First law: what the product absorbed plus what it gained from the air equals its
    # enthalpy rise plus what left with the vapour. The enthalpy rise is recomputed from
    # the final temperatures and moisture through the property tables (independently of
    # the integrator's own bookkeeping), so a wrong inverse or a lost term shows. 0.1 %.
    if case == "tempering":
        model = tempering_model()
        out = model.steady(belt_speed_m_per_min=[0.4, 0.8], zone_forward_kw=[14, 12, 10, 8, 6])
    else:
        model = LineModel(DRYER, FUSILLI)
        out = model.steady(belt_speed_m_per_min=[0.3, 0.6], zone_forward_kw=[6, 6, 5, 4, 3, 2])
    tb = model.tables
    traj = out.trajectory
    mu = MASS_SHARES
    x0 = tb.infeed_water_db(model.product.typical.infeed_moisture_pct_wb)
    t0 = model.product.typical.infeed_temp_c
    h_start = tb.enthalpy(np.full(3, t0), np.full(3, x0)) @ mu
    h_end = (mu * tb.enthalpy(traj.temp_c, traj.water_db)).sum(axis=1)
    gained = traj.absorbed_j_per_kg_dm + traj.air_gain_j_per_kg_dm
    accounted = (h_end - h_start) + traj.evaporation_j_per_kg_dm
    assert np.all(traj.absorbed_j_per_kg_dm > 0)
    np.testing.assert_allclose(accounted, gained, rtol=1e-3)


def test_absorbed_power_plus_cavity_loss_equals_net_forward_power():
    # Energy split at the zone: net forward power (forward − reflected) goes to the load or to
    # the cavity, nothing else (first law at the generator side). Steady flow, 0.1 %.
    model = tempering_model()
    out = model.steady(belt_speed_m_per_min=0.6, zone_forward_kw=[14, 12, 10, 8, 6])
    net = (out.forward_kw - out.reflected_kw).sum(axis=1)
    np.testing.assert_allclose(out.absorbed_kw + out.cavity_loss_kw, net, rtol=1e-3)


# ----------------------------------------------------------------------------- zero power

def test_frozen_piece_in_air_at_its_own_temperature_stays_put():
    # No power and no temperature difference: nothing can change (first law; exact).
    model = tempering_model()
    out = model.steady(belt_speed_m_per_min=0.5, zone_forward_kw=np.zeros(5), infeed_temp_c=-18.0,
                       air_temp_c=-18.0)
    np.testing.assert_allclose(out.compartment_temp_c, -18.0, atol=1e-9)


def test_zero_power_approach_to_air_temperature_follows_newton_cooling():
    # Newton's law of cooling for a thin piece (Biot number h(L/2)/k = 15·0.002/0.5 = 0.06):
    # T − T_air = (T0 − T_air) exp(−h A t / (m c)), with A/m = 1/(ρ L) for the top face.
    # The lumped model's internal conduction makes it slightly slower than the ideal
    # well-mixed body; a Biot number of 0.06 bounds that to about Bi/3 = 2 % of the exponent.
    line = single_zone_line(TEMPERING_LINE)
    thin = dataclasses.replace(PORK, piece_thickness_m=0.004, density_kg_per_m3=1000.0)
    params = ModelParameters.defaults(line, thin).with_values(air_htc_w_per_m2_k=15.0)
    model = LineModel(line, thin, params, substeps_per_zone=200)
    c, rho, L = 3500.0, 1000.0, 0.004
    model.tables = constant_property_tables(model.tables, c_j_per_kg_k=c, k_w_per_m_k=0.5,
                                            rho_kg_per_m3=rho, eps_prime=50.0, eps_loss=15.0)
    speed = 0.2  # 1 m zone → 300 s
    out = model.steady(belt_speed_m_per_min=speed, zone_forward_kw=[0.0], infeed_temp_c=-10.0, air_temp_c=5.0)
    t = 60.0 / speed
    expected = 5.0 - 15.0 * np.exp(-15.0 * t / (rho * L * c))
    rise_model = out.mean_temp_c[0] + 10.0
    rise_expected = expected + 10.0
    assert rise_model == pytest.approx(rise_expected, rel=0.02)


def test_sensible_heating_matches_m_c_delta_t_equals_p_t():
    # Closed form for a thawed product with constant properties, no air exchange, no cavity
    # loss and no reflection: the absorbed power raises the flow's temperature by
    # ΔT = P / (ṁ c) (m c ΔT = η P t with η = 1 here). The integrator must reproduce it to
    # 0.1 % (only round-off and the table interpolation enter).
    line = single_zone_line(TEMPERING_LINE)
    params = ModelParameters.defaults(line, PORK).with_values(air_htc_w_per_m2_k=0.0, cavity_loss_equiv_kg=0.0)
    model = LineModel(line, PORK, params, reflection=ReflectionRelation(0.0, 0.0))
    c = 3500.0
    model.tables = constant_property_tables(model.tables, c_j_per_kg_k=c, k_w_per_m_k=0.5,
                                            rho_kg_per_m3=1050.0, eps_prime=50.0, eps_loss=15.0)
    load, speed, power_kw = 40.0, 0.5, 10.0
    out = model.steady(belt_speed_m_per_min=speed, zone_forward_kw=[power_kw], infeed_temp_c=2.0,
                       belt_load_kg_per_m=load, air_temp_c=2.0)
    flow_kg_per_s = load * speed / 60.0
    expected_rise = power_kw * 1e3 / (flow_kg_per_s * c)
    assert out.mean_temp_c[0] - 2.0 == pytest.approx(expected_rise, rel=1e-3)


# ----------------------------------------------------------------------------- PDE reference

def lambert_slab_rise(x, t, *, L, k, rho, c, q0, delta, terms=400):
    """Temperature rise in an insulated slab with a Lambert's-law source from the face x = 0.

    Eigenfunction solution (Carslaw & Jaeger 1959, Conduction of Heat in Solids, §3.  ,
    as written out in shared/REFERENCES.md): T − T0 = q̄t/(ρc) + Σ q_n/(k λ_n²)(1 − e^(−αλ_n² t)) cos λ_n x.
    """
    a = 1.0 / delta
    alpha = k / (rho * c)
    qbar = q0 * delta * (1 - np.exp(-L / delta)) / L
    n = np.arange(1, terms + 1)[:, None]
    lam = n * np.pi / L
    qn = (2.0 / L) * q0 * a * (1 - (-1.0) ** n * np.exp(-a * L)) / (a ** 2 + lam ** 2)
    series = (qn / (k * lam ** 2) * (1 - np.exp(-alpha * lam ** 2 * t)) * np.cos(lam * np.asarray(x)[None, :])).sum(axis=0)
    return qbar * t / (rho * c) + series


def test_reference_series_reproduces_the_published_case():
    # The check values of the eigenfunction solution (shared/REFERENCES.md, "calc, H"; FiPy
    # reproduces them to 0.003 K): L = 0.10 m, k = 0.5, ρ = 1050, c = 3600, Q0 = 2e5 W/m³,
    # δ = 0.02 m, t = 600 s. 400 terms converge to well below 1e-3 K.
    x = np.array([0.0, 0.01, 0.02, 0.05, 0.10])
    rise = lambert_slab_rise(x, 600.0, L=0.10, k=0.5, rho=1050.0, c=3600.0, q0=2e5, delta=0.02)
    np.testing.assert_allclose(rise, [23.5827, 19.1828, 12.6548, 2.8823, 0.3143], atol=2e-3)


def test_lumped_core_and_outer_layers_follow_the_conduction_reference():
    # A representative block (L = 0.10 m, properties of the reference case) heated from both
    # faces (superposition of the one-face solution and its mirror). The lumped model keeps one
    # temperature for the outer quarters and one for the inner half; against the region means of
    # the exact solution, the mean rise must agree to 0.5 % (energy) and the outer-minus-core
    # spread to 15 %: two lumps exchange heat at the first diffusion mode's rate, which at
    # t = 600 s (√(αt) ≈ 9 mm ≪ L/4) over-states the early exchange somewhat.
    L, k, rho, c, q0, delta, t = 0.10, 0.5, 1050.0, 3600.0, 2e5, 0.02, 600.0
    x = np.linspace(0.0, L, 4001)
    rise = lambert_slab_rise(x, t, L=L, k=k, rho=rho, c=c, q0=q0, delta=delta)
    rise = rise + rise[::-1]  # both faces
    outer_mask = (x < L / 4) | (x > 3 * L / 4)
    outer_ref, core_ref = rise[outer_mask].mean(), rise[~outer_mask].mean()

    line = single_zone_line(TEMPERING_LINE, zone_length_m=1.0, rating_kw=100.0)
    block = dataclasses.replace(PORK, piece_thickness_m=L, density_kg_per_m3=rho)
    params = ModelParameters.defaults(line, block).with_values(
        air_htc_w_per_m2_k=0.0, cavity_loss_equiv_kg=0.0, field_nonuniformity=0.0, loss_factor_scale=1.0)
    model = LineModel(line, block, params, reflection=ReflectionRelation(0.0, 0.0), substeps_per_zone=120)
    # choose a permittivity whose penetration depth is δ at the line's frequency
    eps_prime = 50.0
    eps_loss = brentq(lambda e2: penetration_depth_m(eps_prime, e2, line.frequency_hz) - delta, 0.1, 200.0)
    model.tables = constant_property_tables(model.tables, c_j_per_kg_k=c, k_w_per_m_k=k, rho_kg_per_m3=rho,
                                            eps_prime=eps_prime, eps_loss=eps_loss)
    load = 50.0
    power_per_kg = 2 * q0 * delta * (1 - np.exp(-L / delta)) / (rho * L)
    speed = 60.0 / t  # 1 m zone in 600 s
    out = model.steady(belt_speed_m_per_min=speed, zone_forward_kw=[power_per_kg * load * 1.0 / 1e3],
                       infeed_temp_c=5.0, belt_load_kg_per_m=load, air_temp_c=5.0)
    temps = out.compartment_temp_c[0] - 5.0
    outer_model, core_model = 0.25 * temps[HOT] + 0.75 * temps[COLD], temps[CORE]
    assert 0.5 * (outer_model + core_model) == pytest.approx(0.5 * (outer_ref + core_ref), rel=5e-3)
    assert outer_model - core_model == pytest.approx(outer_ref - core_ref, rel=0.15)


def test_field_weights_follow_lambert_law():
    # Lambert's law from both faces: for L ≫ D_p almost everything is absorbed in the outer
    # quarters (weight → 2, core → 0); for L ≪ D_p the field is uniform (both 1). Closed form.
    outer, core = lambert_field_weights(0.1, np.array([1e3, 0.001]))
    np.testing.assert_allclose(outer, [1.0, 2.0], atol=1e-3)
    np.testing.assert_allclose(core, [1.0, 0.0], atol=1e-3)


# ----------------------------------------------------------------------------- runaway

def test_small_hot_cold_difference_runs_away_once_the_hot_share_thaws():
    # Thermal runaway in tempering (common practice): the warmer part of a block takes more
    # power and ends up thawed or cooked while the rest is still frozen. Below the initial
    # freezing point the loss factor and the apparent heat capacity (latent heat of the ice
    # still melting) rise together, so a 0.5 K head start of the hot share stays small; once it
    # reaches t_f its heat capacity drops to the sensible value while its loss factor stays
    # high (thawed lean meat, To et al. 1974), and the difference must grow by an order of
    # magnitude per kelvin of mean rise. With a uniform field (no built-in non-uniformity), the
    # growth can only come from the dielectric and thermal data.
    line = single_zone_line(TEMPERING_LINE, rating_kw=100.0)
    params = ModelParameters.defaults(line, PORK).with_values(field_nonuniformity=0.0, air_htc_w_per_m2_k=1.0)
    model = LineModel(line, PORK, params)
    steps = 400
    start = np.array([[-17.5, -18.0, -18.0]])
    traj = model.integrate(
        dt_s=np.full((1, steps), 3.0), zone_net_kw=np.full((1, steps), 12.0),
        zone_mass_kg=np.full((1, steps), 55.0), air_temp_c=np.full((1, steps), -18.0),
        air_rh_pct=np.full((1, steps), 50.0), infeed_temp_c=-18.0, infeed_water_db=model.tables.water_db,
        keep_history=True, initial_temp_c=start)
    hist = traj.history_temp_c[0]
    spread = hist[:, HOT] - hist[:, COLD]
    mean = 0.25 * hist[:, HOT] + 0.75 * hist[:, COLD]
    tf = PORK.initial_freezing_point_c
    thawed = np.argmax(hist[:, HOT] > tf + 0.5)
    assert thawed > 0, "the hot share never thawed; the case needs more energy"
    before = slice(0, thawed - 10)
    assert np.all(spread[before] < 2.0)  # frozen: the head start stays of its own size
    after = min(thawed + 10, steps)
    growth_frozen = (spread[thawed - 10] - spread[0]) / (mean[thawed - 10] - mean[0])
    growth_thawed = (spread[after] - spread[thawed]) / (mean[after] - mean[thawed])
    assert growth_thawed > 10 * max(growth_frozen, 0.01)
    assert spread[-1] > 10 * spread[0]


def test_lower_power_with_longer_residence_gives_smaller_spread_at_same_mean():
    # Common practice in tempering: slow and gentle beats fast and hard. At the same mean outfeed
    # temperature, the slower belt with less power leaves a smaller hot-minus-cold spread,
    # because conduction has more time to even it out.
    model = tempering_model()

    def mean_at(speed, scale):
        out = model.steady(belt_speed_m_per_min=speed, zone_forward_kw=scale * np.array([1.0, 1, 1, 1, 1]))
        return out

    target = -6.0
    results = []
    for speed in (0.35, 0.9):
        scale = brentq(lambda s: mean_at(speed, s).mean_temp_c[0] - target, 0.5, 25.0, xtol=1e-6)
        out = mean_at(speed, scale)
        results.append((scale, out.hottest_temp_c[0] - out.coldest_temp_c[0]))
    (p_slow, spread_slow), (p_fast, spread_fast) = results
    assert p_slow < p_fast
    assert spread_slow < spread_fast


# ----------------------------------------------------------------------------- numerics

def test_parcels_one_by_one_equal_parcels_all_at_once():
    # Batching invariance: each parcel's result depends on its own inputs only.
    model = tempering_model()
    speeds = np.array([0.3, 0.5, 0.9, 1.4])
    powers = np.array([[10, 10, 8, 6, 4], [20, 18, 15, 10, 5], [25, 25, 20, 15, 10], [5, 5, 5, 5, 5]], float)
    t_in = np.array([-20.0, -18.0, -16.0, -19.0])
    together = model.steady(belt_speed_m_per_min=speeds, zone_forward_kw=powers, infeed_temp_c=t_in)
    for i in range(4):
        alone = model.steady(belt_speed_m_per_min=speeds[i], zone_forward_kw=powers[i], infeed_temp_c=t_in[i])
        np.testing.assert_allclose(alone.compartment_temp_c[0], together.compartment_temp_c[i], rtol=0, atol=1e-12)
        np.testing.assert_allclose(alone.specific_energy_kwh_per_t[0], together.specific_energy_kwh_per_t[i],
                                   rtol=1e-14)


@pytest.mark.parametrize("case", ["tempering", "tempering-runaway", "drying"])
def test_integration_is_stable_at_zone_steps_and_converges_as_steps_shrink(case):
    # Numerical check: the error against a 96-step-per-zone solution falls steadily as the step
    # shrinks (first order for this semi-implicit scheme: halving the step roughly halves the
    # error). In the regime the targets live in (hot share below its freezing point), one step
    # per zone is already within 1 K and the default 6 within 0.2 K; in the dryer (explicit
    # evaporation, strongly temperature-dependent) within 5 K and 0.3 K. A runaway case (hot
    # share thawing, the loss factor jumping within a step) converges too, with a larger constant.
    if case == "tempering":
        line, product, settings = TEMPERING_LINE, PORK, dict(belt_speed_m_per_min=0.6, zone_forward_kw=[12, 12, 10, 8, 6])
    elif case == "tempering-runaway":
        line, product, settings = TEMPERING_LINE, PORK, dict(belt_speed_m_per_min=0.5, zone_forward_kw=[16, 14, 12, 10, 8])
    else:
        line, product, settings = DRYER, FUSILLI, dict(belt_speed_m_per_min=0.4, zone_forward_kw=[7, 7, 6, 5, 4, 3])
    ref = LineModel(line, product, substeps_per_zone=96).steady(**settings).compartment_temp_c[0]
    errors = {}
    for n in (1, 3, 6, 12, 24):
        out = LineModel(line, product, substeps_per_zone=n).steady(**settings).compartment_temp_c[0]
        assert np.all(np.isfinite(out))
        errors[n] = np.abs(out - ref).max()
    values = list(errors.values())
    assert all(b < a for a, b in zip(values, values[1:]))
    assert errors[24] < 0.65 * errors[12]
    bounds = {"tempering": (1.0, 0.2), "drying": (5.0, 0.3)}
    if case in bounds:
        assert errors[1] < bounds[case][0] and errors[6] < bounds[case][1]


# ----------------------------------------------------------------------------- transport

def test_logged_constant_settings_reproduce_the_steady_state():
    # Transport: once a full residence time of constant settings has passed, the parcels
    # leaving see exactly what a steady-state run sees (same equations, same steps). 1e-6 K.
    model = tempering_model()
    n = 200
    t = np.arange(n) * 10.0
    fwd = np.tile([14.0, 12, 10, 8, 6], (n, 1))
    series = model.series(time_s=t, belt_speed_m_per_min=np.full(n, 0.8), zone_forward_kw=fwd,
                          infeed_temp_c=np.full(n, -18.0), belt_load_kg_per_m=np.full(n, 55.0),
                          air_temp_c=np.full(n, 2.0))
    steady = model.steady(belt_speed_m_per_min=0.8, zone_forward_kw=fwd[0], infeed_temp_c=-18.0,
                          belt_load_kg_per_m=55.0, air_temp_c=2.0)
    residence = TEMPERING_LINE.tunnel_length_m / (0.8 / 60)
    late = t > residence + 20
    early = t < residence - 20
    assert np.all(np.isnan(series.core_temp_c[early]))
    np.testing.assert_allclose(series.core_temp_c[late], steady.core_temp_c[0], atol=1e-6)


def test_a_power_step_reaches_the_outfeed_after_the_transport_delay():
    # A parcel entering at t sees each zone's power when it is there: a step in the last
    # zone's power shows at the outfeed after (outfeed choke + part of the last zone)/speed,
    # a step in the first zone only after it has travelled the rest of the tunnel.
    model = tempering_model()
    n = 400
    t = np.arange(n) * 5.0
    speed = 1.2
    v = speed / 60.0
    base = np.tile([10.0, 10, 10, 10, 10], (n, 1))
    step_at = 1000.0
    line = TEMPERING_LINE
    for zone in (0, 4):
        fwd = base.copy()
        fwd[t >= step_at, zone] = 20.0
        out = model.series(time_s=t, belt_speed_m_per_min=np.full(n, speed), zone_forward_kw=fwd,
                           infeed_temp_c=np.full(n, -18.0), belt_load_kg_per_m=np.full(n, 55.0),
                           air_temp_c=np.full(n, 2.0))
        ref = model.series(time_s=t, belt_speed_m_per_min=np.full(n, speed), zone_forward_kw=base,
                           infeed_temp_c=np.full(n, -18.0), belt_load_kg_per_m=np.full(n, 55.0),
                           air_temp_c=np.full(n, 2.0))
        changed = np.abs(out.mean_temp_c - ref.mean_temp_c) > 1e-9
        first_change = t[np.argmax(changed & np.isfinite(ref.mean_temp_c))]
        zone_end = line.infeed_choke_m + sum(line.zone_length_m[: zone + 1])
        zone_start = zone_end - line.zone_length_m[zone]
        earliest = step_at + (line.tunnel_length_m - zone_end) / v
        latest = step_at + (line.tunnel_length_m - zone_start) / v
        assert earliest - 5.0 <= first_change <= latest + 5.0


# ----------------------------------------------------------------------------- outputs

def test_outfeed_array_reading_lies_between_core_and_surface():
    # Needle probes 35 mm below the top of a 140 mm block read between the outer layer and the
    # core; the hottest probe is never hotter than the hot share (geometry of the array).
    model = tempering_model()
    out = model.steady(belt_speed_m_per_min=0.5, zone_forward_kw=[16, 14, 12, 10, 8])
    temps = out.compartment_temp_c[0]
    outer = 0.25 * temps[HOT] + 0.75 * temps[COLD]
    lo, hi = sorted([outer, temps[CORE]])
    assert lo <= out.outfeed_temp_mean_c[0] <= hi
    assert out.outfeed_temp_max_c[0] <= temps[HOT] + 1e-12
    assert out.outfeed_temp_min_c[0] <= out.outfeed_temp_mean_c[0] <= out.outfeed_temp_max_c[0]


def test_dryer_removes_water_and_loss_factor_falls_as_it_dries():
    # Drying: more power at the same speed takes out more water; the evaporation energy is of the
    # order of the latent heat times the water removed (2.3 MJ/kg at 80-100 °C, IAPWS).
    model = LineModel(DRYER, FUSILLI)
    out = model.steady(belt_speed_m_per_min=0.4, zone_forward_kw=[[2, 2, 2, 2, 2, 2], [7, 7, 6, 5, 4, 3]])
    assert out.outfeed_moisture_pct_wb[1] < out.outfeed_moisture_pct_wb[0] < FUSILLI.typical.infeed_moisture_pct_wb
    traj = out.trajectory
    per_kg_water = traj.evaporation_j_per_kg_dm / traj.evaporated_kg_per_kg_dm
    assert np.all((per_kg_water > 2.2e6) & (per_kg_water < 2.8e6))
    tb = model.tables
    wet, dry = tb.loss_factor(np.array([60.0, 60.0]), np.array([0.45, 0.12]))
    assert dry < wet


def test_specific_energy_counts_generators_at_their_efficiency_and_auxiliaries():
    # Electricity from the mains: Σ forward / η + auxiliaries, per tonne of infeed (definition).
    model = tempering_model(mains_to_rf_efficiency=0.8, aux_power_kw=5.0)
    out = model.steady(belt_speed_m_per_min=0.5, zone_forward_kw=[10, 10, 10, 10, 10], belt_load_kg_per_m=50.0)
    flow_t_per_h = 50.0 * 0.5 * 60 / 1000
    assert out.specific_energy_kwh_per_t[0] == pytest.approx((50 / 0.8 + 5.0) / flow_t_per_h, rel=1e-12)


def test_a_standing_belt_in_the_dryer_stays_physical():
    # A 15-minute belt stop with the generators interlocked off: the parcels in the tunnel sit in
    # 80 °C air. Their temperature must stay between the infeed and air temperatures (second law:
    # no power, nothing hotter than the air) and they keep drying; nothing may become NaN.
    model = LineModel(DRYER, FUSILLI)
    n = 600
    t = np.arange(n) * 10.0
    speed = np.full(n, 0.5)
    fwd = np.tile([6.0, 6, 5, 4, 3, 2], (n, 1))
    stop = (t >= 3000) & (t < 3900)
    speed[stop] = 0.0
    fwd[stop] = 0.0
    out = model.series(time_s=t, belt_speed_m_per_min=speed, zone_forward_kw=fwd, infeed_temp_c=np.full(n, 35.0),
                       belt_load_kg_per_m=np.full(n, 8.0), air_temp_c=np.full(n, 80.0),
                       infeed_moisture_pct_wb=np.full(n, 31.0), air_rh_pct=np.full(n, 25.0))
    after = np.isfinite(out.core_temp_c)
    assert after.sum() > 100
    temps = out.compartment_temp_c[after]
    assert np.all(np.isfinite(temps))
    assert temps.min() >= 35.0 - 1e-6 and out.hottest_during_passage_c[after].max() <= 100.0 + 1e-6
    assert np.all(out.outfeed_moisture_pct_wb[after] < 31.0)


def test_the_integrators_3x3_solve_agrees_with_lapack():
    # Oracle: numpy.linalg.solve (LAPACK gesv) on systems shaped like the integrator's:
    # a positive diagonal minus a symmetric conduction matrix with a zero diagonal.
    from optimizer.line.model import solve3

    rng = np.random.default_rng(0)
    G = rng.uniform(0.0, 1.0, (400, 3, 3))
    G = 0.5 * (G + G.transpose(0, 2, 1))
    G[:, range(3), range(3)] = 0.0
    A = (rng.uniform(0.01, 5.0, (400, 3)) + G.sum(axis=2))[:, :, None] * np.eye(3) - G
    b = rng.normal(size=(400, 3)) * 10.0 ** rng.integers(-3, 4, (400, 1))
    want = np.linalg.solve(A, b[:, :, None])[:, :, 0]
    np.testing.assert_allclose(solve3(A, b), want, rtol=1e-10, atol=1e-12 * np.abs(want).max())
