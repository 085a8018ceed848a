"""The lumped thermal-dielectric model of a conveyor line: zones in series on a moving belt.

A parcel of product carries three compartments of specific enthalpy (and moisture):
a *hot* and a *cold* share of the outer layers, which see more or less of the field
across the belt, and the *core* (the inner half of the thickness), which sees the
field attenuated by Lambert's law over the power penetration depth. Net forward
power is split between the load and the cavity losses in proportion to their loss
(mass × field weight × loss factor), so a compartment near its freezing point, being
lossier, takes more: thermal runaway emerges from the dielectric data. Compartments
exchange heat by conduction at the rate of the first diffusion mode of their
geometry and with the tunnel air; dryers evaporate water by a thin-layer (Lewis)
rate with an Arrhenius temperature dependence and flash off what would exceed the
boiling point.

State is per kilogram of dry matter (so drying keeps mass balances exact). Time is
integrated with a semi-implicit step (heat exchange implicit, linearised on the
apparent heat capacity; absorption and evaporation explicit), which is stable at
zone-level steps and converges as they shrink.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .. import properties as props
from ..config import Line, Product
from ..properties.composition import Composition
from .params import ModelParameters

#: Mass share of the outer layers' hot part (the cold part is the rest). Structural choice:
#: roughly one lane in four of a multimode tunnel sits under a field maximum (common practice).
HOT_SHARE = 0.25
#: Outer layers: the outer quarter of the thickness from each face, i.e. half the mass.
OUTER_MASS_SHARE = 0.5
#: Compartment order in state arrays, and each compartment's share of the dry matter.
HOT, COLD, CORE = 0, 1, 2
MASS_SHARES = np.array([OUTER_MASS_SHARE * HOT_SHARE, OUTER_MASS_SHARE * (1 - HOT_SHARE), 1 - OUTER_MASS_SHARE])
COMPARTMENTS = ("hot", "cold", "core")
#: Activation energy of the drying rate [J mol⁻¹]; 20–50 kJ/mol is the usual range for
#: cereal products (from memory); a structural constant, not fitted.
DRYING_ACTIVATION_J_PER_MOL = 30e3
DRYING_REFERENCE_TEMP_C = 80.0
GAS_CONSTANT = 8.314462618
BOILING_TEMP_C = 100.0
#: Longest integration step [s]: a parcel standing in a zone for minutes (belt stop) is
#: integrated in pieces this long, so the explicit absorption and evaporation stay stable.
MAX_STEP_S = 120.0
#: GAB sorption isotherm of starchy foods (monolayer X_m [kg/kg db], C, K), typical values
#: from memory; used only for the equilibrium moisture the Lewis rate relaxes to.
GAB_STARCHY = (0.07, 10.0, 0.8)


@dataclass(frozen=True)
class ReflectionRelation:
    """Reflected share of forward power as a function of the load in the zone.

    fraction = clip(base_fraction + light_load_kg / zone_mass_kg, 0, 0.95): a
    well-matched loaded cavity reflects little; a lightly loaded one more.
    """

    base_fraction: float = 0.05
    light_load_kg: float = 0.0

    def fraction(self, zone_mass_kg):
        m = np.maximum(np.asarray(zone_mass_kg, dtype=float), 1e-6)
        return np.clip(self.base_fraction + self.light_load_kg / m, 0.0, 0.95)


@dataclass(frozen=True)
class ProductTables:
    """Property tables of one product (at one freezing point) for fast interpolation.

    Enthalpy is per kilogram of dry matter: H = (1 + X) h(T) for a product of fixed
    water content X [kg kg⁻¹ db]; for a drying product H = H_dm(T) + X h_w(T), exact
    because Choi–Okos mixing is linear in the component masses.
    """

    process: str
    frequency_hz: float
    dry_matter: Composition  # solids only, fractions of dry matter
    water_db: float  # water of the configured composition [kg/kg db]
    freezing_point_c: float | None
    temp_grid_c: np.ndarray
    enthalpy_grid: np.ndarray  # tempering: H(T) per kg dm at water_db; drying: H_dm(T)
    water_enthalpy_grid: np.ndarray  # h of liquid water (no freezing), J/kg
    heat_capacity_grid: np.ndarray  # tempering: dH/dT per kg dm; drying: dH_dm/dT
    water_heat_capacity_grid: np.ndarray
    latent_heat_grid: np.ndarray  # of vaporisation [J/kg]
    saturation_pressure_grid: np.ndarray  # of water [Pa]
    water_grid_db: np.ndarray  # moisture axis of the 2-D tables (drying); one entry (tempering)
    eps_prime_table: np.ndarray  # (n_water, n_temp)
    eps_loss_table: np.ndarray
    conductivity_table: np.ndarray  # [W m-1 K-1]
    density_kg_per_m3: float  # of the product as it lies on the belt (bulk for beds)

    @classmethod
    def build(cls, line: Line, product: Product, freezing_point_shift_k: float = 0.0) -> "ProductTables":
        comp = product.composition
        solids = comp.solids
        dry = Composition(water=0.0, **{k: v / solids for k, v in comp.as_dict().items() if k != "water"})
        water_db = comp.water / solids
        f = line.frequency_hz
        pure_water = Composition(water=1.0)
        if product.process == "tempering":
            tf = product.initial_freezing_point_c + freezing_point_shift_k
            # dense where the ice melts (the enthalpy curve bends sharply just below t_f)
            temps = np.unique(np.concatenate([
                np.linspace(-45.0, tf - 4.0, 200), np.linspace(tf - 4.0, tf, 801),
                np.linspace(tf, 100.0, 500)]))
            h = props.specific_enthalpy_j_per_kg(comp, temps, tf)
            enthalpy = (1.0 + water_db) * h
            cap = (1.0 + water_db) * props.apparent_specific_heat_j_per_kg_k(comp, temps, tf)
            waters = np.array([water_db])
            e1, e2 = props.food_permittivity(comp, temps, f, tf)
            k = props.thermal_conductivity_w_per_m_k(comp, temps, tf)
            e1, e2, k = (np.atleast_2d(np.broadcast_to(a, temps.shape)) for a in (e1, e2, k))
        else:
            tf = None
            temps = np.linspace(-10.0, 160.0, 341)  # uniform: located by arithmetic, no search
            enthalpy = props.specific_enthalpy_j_per_kg(dry, temps, None)
            cap = props.specific_heat_j_per_kg_k(dry, temps)
            waters = np.linspace(0.0, max(1.0, 1.5 * water_db), 61)
            wet = comp.with_moisture((waters / (1.0 + waters))[:, None])
            e1, e2 = props.food_permittivity(wet, temps[None, :], f, None)
            k = props.thermal_conductivity_w_per_m_k(wet, temps[None, :], None)
            shape = (waters.size, temps.size)
            e1, e2, k = (np.broadcast_to(a, shape).copy() for a in (e1, e2, k))
        hw = props.specific_enthalpy_j_per_kg(pure_water, temps, None)
        cw = props.specific_heat_j_per_kg_k(pure_water, temps)
        warm = np.maximum(temps, 0.01)  # vapour data of liquid water; below 0 °C it is not used
        if product.density_kg_per_m3 is not None:
            rho = product.density_kg_per_m3
        else:
            rho = float(np.asarray(props.density_kg_per_m3(comp, product.typical.infeed_temp_c, tf)))
            if product.bed_porosity is not None:
                rho *= 1.0 - product.bed_porosity
        return cls(product.process, f, dry, water_db, tf, temps, np.asarray(enthalpy, float),
                   np.asarray(hw, float), np.asarray(cap, float), np.asarray(cw, float),
                   np.asarray(props.latent_heat_vaporisation_j_per_kg(warm), float),
                   np.asarray(props.saturation_pressure_pa(warm), float), waters, e1, e2, k, float(rho))

    # -- moisture conversions -------------------------------------------------------------
    def infeed_water_db(self, moisture_pct_wb):
        """Infeed water [kg/kg db]: from a wet-basis percentage, or the configured composition."""
        if moisture_pct_wb is None or self.process == "tempering":
            return np.asarray(self.water_db)
        w = np.asarray(moisture_pct_wb, dtype=float) / 100.0
        return w / (1.0 - w)

    # -- locating a state in the tables -----------------------------------------------------
    def locate(self, temp_c):
        """Index and fraction of each temperature on the grid (held at the ends)."""
        t = self.temp_grid_c
        temp_c = np.asarray(temp_c, dtype=float)
        if self.process == "drying":
            fi = np.clip((temp_c - t[0]) / (t[1] - t[0]), 0.0, t.size - 1.000001)
            i = fi.astype(np.intp)
            return i, fi - i
        i = np.clip(np.searchsorted(t, temp_c, side="right") - 1, 0, t.size - 2)
        return i, np.clip((temp_c - t[i]) / (t[i + 1] - t[i]), 0.0, 1.0)

    @staticmethod
    def _lin(grid, loc):
        i, a = loc
        return grid[i] + a * (grid[i + 1] - grid[i])

    def _table(self, table, loc, water_db):
        if table.shape[0] == 1:
            return self._lin(table[0], loc)
        i, a = loc
        w = self.water_grid_db
        fj = np.clip((np.asarray(water_db, dtype=float) - w[0]) / (w[1] - w[0]), 0.0, w.size - 1.000001)
        j = fj.astype(np.intp)
        b = fj - j
        lo = table[j, i] + a * (table[j, i + 1] - table[j, i])
        hi = table[j + 1, i] + a * (table[j + 1, i + 1] - table[j + 1, i])
        return lo + b * (hi - lo)

    # -- enthalpy <-> temperature -------------------------------------------------------------
    def enthalpy(self, temp_c, water_db, loc=None):
        """Specific enthalpy [J per kg dry matter]."""
        loc = self.locate(temp_c) if loc is None else loc
        if self.process == "tempering":
            return self._lin(self.enthalpy_grid, loc)
        return self._lin(self.enthalpy_grid, loc) + water_db * self._lin(self.water_enthalpy_grid, loc)

    def heat_capacity(self, temp_c, water_db, loc=None):
        """dH/dT [J K⁻¹ per kg dry matter] (apparent: includes latent heat of melting ice)."""
        loc = self.locate(temp_c) if loc is None else loc
        if self.process == "tempering":
            return self._lin(self.heat_capacity_grid, loc)
        return self._lin(self.heat_capacity_grid, loc) + water_db * self._lin(self.water_heat_capacity_grid, loc)

    def temperature(self, enthalpy, water_db, guess_c=None):
        """Temperature [°C] from enthalpy per kg dry matter (inverse of :meth:`enthalpy`).

        Tempering: the inverse of the monotone table. Drying: Newton on H_dm(T) + X h_w(T),
        which is smooth and nearly linear, from ``guess_c`` (or a linear first guess).
        """
        if self.process == "tempering":
            return np.interp(enthalpy, self.enthalpy_grid, self.temp_grid_c)
        if guess_c is None:
            temp = np.interp(enthalpy - water_db * np.interp(20.0, self.temp_grid_c, self.water_enthalpy_grid),
                             self.enthalpy_grid, self.temp_grid_c)
            iterations = 3
        else:
            temp, iterations = guess_c, 2
        for _ in range(iterations):
            loc = self.locate(temp)
            temp = temp - (self.enthalpy(temp, water_db, loc) - enthalpy) / self.heat_capacity(temp, water_db, loc)
        return temp

    def water_enthalpy(self, temp_c, loc=None):
        return self._lin(self.water_enthalpy_grid, self.locate(temp_c) if loc is None else loc)

    def latent_heat(self, temp_c, loc=None):
        return self._lin(self.latent_heat_grid, self.locate(temp_c) if loc is None else loc)

    def saturation_pressure(self, temp_c, loc=None):
        return self._lin(self.saturation_pressure_grid, self.locate(temp_c) if loc is None else loc)

    # -- dielectric and conduction ------------------------------------------------------------
    def permittivity(self, temp_c, water_db, loc=None):
        """(ε', ε'') of the product at its temperature and moisture."""
        loc = self.locate(temp_c) if loc is None else loc
        return (self._table(self.eps_prime_table, loc, water_db), self._table(self.eps_loss_table, loc, water_db))

    def loss_factor(self, temp_c, water_db, loc=None):
        return self._table(self.eps_loss_table, self.locate(temp_c) if loc is None else loc, water_db)

    def conductivity(self, temp_c, water_db, loc=None):
        return self._table(self.conductivity_table, self.locate(temp_c) if loc is None else loc, water_db)


def solve3(A: np.ndarray, b: np.ndarray) -> np.ndarray:
    """x with A x = b for a stack of 3 × 3 systems (A: (n, 3, 3), b: (n, 3)), by cofactors.

    For the integrator's small, diagonally dominant systems this is a few vector operations
    instead of one LAPACK call per parcel (np.linalg.solve), and agrees with it to rounding.
    """
    a00, a01, a02 = A[:, 0, 0], A[:, 0, 1], A[:, 0, 2]
    a10, a11, a12 = A[:, 1, 0], A[:, 1, 1], A[:, 1, 2]
    a20, a21, a22 = A[:, 2, 0], A[:, 2, 1], A[:, 2, 2]
    b0, b1, b2 = b[:, 0], b[:, 1], b[:, 2]
    c00 = a11 * a22 - a12 * a21
    c01 = a12 * a20 - a10 * a22
    c02 = a10 * a21 - a11 * a20
    det = a00 * c00 + a01 * c01 + a02 * c02
    x0 = b0 * c00 + b1 * (a02 * a21 - a01 * a22) + b2 * (a01 * a12 - a02 * a11)
    x1 = b0 * c01 + b1 * (a00 * a22 - a02 * a20) + b2 * (a02 * a10 - a00 * a12)
    x2 = b0 * c02 + b1 * (a01 * a20 - a00 * a21) + b2 * (a00 * a11 - a01 * a10)
    return np.stack([x0, x1, x2], axis=1) / det[:, None]


def lambert_field_weights(thickness_m, penetration_depth_m):
    """Mean power weight of the outer layers and of the core of a slab heated from both faces.

    Power density p(x) ∝ exp(−x/D) + exp(−(L−x)/D) (Lambert's law from each face),
    averaged over the outer quarters (|x − L/2| > L/4) and the inner half, each
    divided by the slab mean, so ``(outer + core) / 2 == 1``.

    >>> [round(float(v), 4) for v in lambert_field_weights(0.1, 1e6)]
    [1.0, 1.0]
    """
    L = np.asarray(thickness_m, dtype=float)
    D = np.maximum(np.asarray(penetration_depth_m, dtype=float), 1e-6)
    u = L / D

    def integral(a, b):  # ∫_a^b of the two-face profile, in units of D (a, b as fractions of L)
        return (np.exp(-a * u) - np.exp(-b * u)) + (np.exp(-(1 - b) * u) - np.exp(-(1 - a) * u))

    total = integral(0.0, 1.0)
    outer = (integral(0.0, 0.25) + integral(0.75, 1.0)) / total * 2.0
    core = integral(0.25, 0.75) / total * 2.0
    return outer, core


@dataclass(frozen=True)
class _Coefficients:
    """Per-parcel parameter arrays (N,) of one integration."""

    loss_scale: np.ndarray
    nonuniformity: np.ndarray
    cavity_kg: np.ndarray
    htc: np.ndarray
    drying_rate: np.ndarray
    water_in: np.ndarray
    area_per_kg_dm: np.ndarray


@dataclass(frozen=True)
class _Rates:
    """Rates at one state: per kg dry matter of each compartment unless said otherwise."""

    absorbed_w_per_kg_dm: np.ndarray  # (N, 3)
    cavity_w_per_kg_dm: np.ndarray  # (N,) per kg dm of the whole parcel
    conductance: np.ndarray  # (N, 3, 3) W K-1 per kg dm of the parcel
    air_w_per_k: np.ndarray  # (N, 3)
    evaporation_per_s: np.ndarray  # (N, 3) kg water per kg dm per s
    water_eq_db: np.ndarray  # (N, 3)


@dataclass
class Trajectory:
    """Per-parcel results of one pass through the tunnel (arrays over parcels N)."""

    temp_c: np.ndarray  # (N, 3) final compartment temperatures
    water_db: np.ndarray  # (N, 3)
    max_temp_during_c: np.ndarray  # (N,) hottest compartment at any step
    absorbed_j_per_kg_dm: np.ndarray  # (N,)
    air_gain_j_per_kg_dm: np.ndarray
    evaporation_j_per_kg_dm: np.ndarray
    evaporated_kg_per_kg_dm: np.ndarray
    enthalpy_rise_j_per_kg_dm: np.ndarray
    cavity_loss_j_per_kg_dm: np.ndarray
    history_temp_c: np.ndarray | None  # (N, S+1, 3)
    history_water_db: np.ndarray | None


@dataclass
class Outcome:
    """What the model predicts for parcels leaving the tunnel (arrays over N parcels)."""

    # what the line's outfeed array would read
    outfeed_temp_mean_c: np.ndarray
    outfeed_temp_min_c: np.ndarray
    outfeed_temp_max_c: np.ndarray
    # in the piece, where the targets are written
    core_temp_c: np.ndarray
    hottest_temp_c: np.ndarray
    coldest_temp_c: np.ndarray
    hottest_during_passage_c: np.ndarray
    mean_temp_c: np.ndarray
    outfeed_moisture_pct_wb: np.ndarray | None
    compartment_temp_c: np.ndarray  # (N, 3) hot, cold, core
    # settings, energy and flow
    belt_speed_m_per_min: np.ndarray
    belt_load_kg_per_m: np.ndarray
    infeed_temp_c: np.ndarray
    infeed_water_db: np.ndarray
    air_temp_c: np.ndarray
    throughput_kg_per_h: np.ndarray
    residence_time_s: np.ndarray
    absorbed_kw: np.ndarray
    air_gain_kw: np.ndarray
    cavity_loss_kw: np.ndarray
    evaporation_kw: np.ndarray
    reflected_kw: np.ndarray  # (N, Z)
    forward_kw: np.ndarray  # (N, Z)
    electric_kw: np.ndarray
    specific_energy_kwh_per_t: np.ndarray
    trajectory: Trajectory
    positions_m: np.ndarray  # (S+1,) sub-step boundaries


def _as_column(value, n):
    return np.broadcast_to(np.asarray(value, dtype=float), (n,)).astype(float)


def _model_outcome(model: "LineModel", traj: Trajectory, *, speed, load, infeed_temp_c, air_temp_c,
                   residence_s, forward_kw, reflected_kw, electric_kw, water_in_db) -> Outcome:
    flow_kg_per_h = load * np.nan_to_num(speed) * 60.0
    tb = model.tables
    temp = traj.temp_c
    line = model.line
    thickness = model.product.piece_thickness_m
    arr = line.outfeed_array
    # probe tip between the outer layer's centroid (L/8 deep) and the core's (L/2)
    blend = float(np.clip((arr.depth_m - thickness / 8.0) / (3.0 * thickness / 8.0), 0.0, 1.0))
    lanes_hot = (1 - blend) * temp[:, HOT] + blend * temp[:, CORE]
    lanes_cold = (1 - blend) * temp[:, COLD] + blend * temp[:, CORE]
    lanes_mean = HOT_SHARE * lanes_hot + (1 - HOT_SHARE) * lanes_cold
    if arr.count == 1:
        lanes_hot = lanes_cold = lanes_mean
    mu = MASS_SHARES
    dm_flow_kg_per_s = flow_kg_per_h / 3600.0 / (1.0 + water_in_db)
    if tb.process == "drying":
        x_mean = (mu * traj.water_db).sum(axis=1)
        moisture = 100.0 * x_mean / (1.0 + x_mean)
    else:
        moisture = None
    with np.errstate(divide="ignore", invalid="ignore"):
        se = np.where(flow_kg_per_h > 0, electric_kw / (flow_kg_per_h / 1000.0), np.nan)
    return Outcome(
        outfeed_temp_mean_c=lanes_mean, outfeed_temp_min_c=lanes_cold, outfeed_temp_max_c=lanes_hot,
        core_temp_c=temp[:, CORE], hottest_temp_c=temp.max(axis=1), coldest_temp_c=temp.min(axis=1),
        hottest_during_passage_c=traj.max_temp_during_c, mean_temp_c=(mu * temp).sum(axis=1),
        outfeed_moisture_pct_wb=moisture, compartment_temp_c=temp, belt_speed_m_per_min=speed,
        belt_load_kg_per_m=load, infeed_temp_c=infeed_temp_c, infeed_water_db=water_in_db,
        air_temp_c=air_temp_c,
        throughput_kg_per_h=flow_kg_per_h,
        residence_time_s=residence_s,
        absorbed_kw=traj.absorbed_j_per_kg_dm * dm_flow_kg_per_s / 1e3,
        air_gain_kw=traj.air_gain_j_per_kg_dm * dm_flow_kg_per_s / 1e3,
        cavity_loss_kw=traj.cavity_loss_j_per_kg_dm * dm_flow_kg_per_s / 1e3,
        evaporation_kw=traj.evaporation_j_per_kg_dm * dm_flow_kg_per_s / 1e3,
        reflected_kw=reflected_kw, forward_kw=forward_kw, electric_kw=electric_kw,
        specific_energy_kwh_per_t=se, trajectory=traj, positions_m=model.step_positions_m,
    )


def _electric_kw(model: "LineModel", forward_kw, air_temp_c, pv):
    eff = np.asarray(pv["mains_to_rf_efficiency"], float)
    aux = np.asarray(pv["aux_power_kw"], float)
    heater = np.asarray(pv.get("air_heater_kw_per_k", 0.0), float)
    lift = np.maximum(np.asarray(air_temp_c, float) - model.line.ambient_temp_c, 0.0)
    return forward_kw.sum(axis=-1) / eff + aux + heater * lift


class LineModel:
    """A line × product model with its parameters; simulate steady states or log series."""

    def __init__(self, line: Line, product: Product, parameters: ModelParameters | None = None,
                 reflection: ReflectionRelation | None = None, substeps_per_zone: int = 6,
                 choke_substeps: int = 2):
        if product.process != line.kind:
            raise ValueError(f"product {product.product_id} is a {product.process} product; line "
                             f"{line.line_id} is a {line.kind} line")
        self.line = line
        self.product = product
        self.parameters = parameters or ModelParameters.defaults(line, product)
        self.reflection = reflection or ReflectionRelation()
        self.substeps_per_zone = int(substeps_per_zone)
        self.choke_substeps = int(choke_substeps)
        shift = self.parameters.get("freezing_point_shift_k", 0.0)
        self.tables = ProductTables.build(line, product, freezing_point_shift_k=shift)
        self._segments = self._build_segments()
        lam0 = float(props.free_space_wavelength_m(line.frequency_hz))
        #: hot and cold spots lie about half a free-space wavelength apart (common practice)
        self.pattern_period_m = lam0 / 2.0

    # -- geometry of the pass -----------------------------------------------------------------
    def _build_segments(self):
        """Sub-steps along the tunnel: (start position, length, zone index or -1 for chokes)."""
        line = self.line
        starts, lengths, zones = [], [], []
        pos = 0.0

        def add(length, zone, n):
            nonlocal pos
            for _ in range(n):
                starts.append(pos)
                lengths.append(length / n)
                zones.append(zone)
                pos += length / n

        if line.infeed_choke_m > 0:
            add(line.infeed_choke_m, -1, self.choke_substeps)
        for z, length in enumerate(line.zone_length_m):
            add(length, z, self.substeps_per_zone)
        if line.outfeed_choke_m > 0:
            add(line.outfeed_choke_m, -1, self.choke_substeps)
        return np.array(starts), np.array(lengths), np.array(zones, dtype=int)

    @property
    def step_positions_m(self) -> np.ndarray:
        """Boundaries of the sub-steps along the tunnel [m from the infeed], S + 1 values."""
        starts, lengths, _ = self._segments
        return np.append(starts, starts[-1] + lengths[-1])

    @property
    def step_zone(self) -> np.ndarray:
        return self._segments[2]

    # -- the integrator -----------------------------------------------------------------------
    def integrate(self, *, dt_s, zone_net_kw, zone_mass_kg, air_temp_c, air_rh_pct, infeed_temp_c,
                  infeed_water_db, keep_history=False, param_overrides=None,
                  initial_temp_c=None) -> Trajectory:
        """Carry parcels through the sub-steps.

        Parameters
        ----------
        dt_s : array (N, S)
            Time each parcel spends in each sub-step [s].
        zone_net_kw : array (N, S)
            Net forward power (forward − reflected) of the zone the sub-step lies in, at the
            time the parcel is there [kW]; 0 in chokes.
        zone_mass_kg : array (N, S)
            Product mass in that zone [kg] (belt load × zone length).
        air_temp_c, air_rh_pct : arrays (N, S)
            Tunnel air temperature [°C] and relative humidity [%].
        infeed_temp_c, infeed_water_db : arrays (N,)
            The parcel at the infeed: temperature [°C] and water [kg/kg dry basis].
        param_overrides : dict, optional
            Parameter values given as arrays (N,) (e.g. samples of the fitted distribution).
        initial_temp_c : array (N, 3), optional
            Compartment temperatures at the infeed when they differ (default: all at
            ``infeed_temp_c``).
        """
        tb = self.tables
        dt_s = np.asarray(dt_s, dtype=float)
        n, s = dt_s.shape
        coef = self._coefficients(n, infeed_water_db, param_overrides)
        drying = tb.process == "drying"
        mu = MASS_SHARES
        if initial_temp_c is None:
            temp = np.repeat(np.broadcast_to(np.asarray(infeed_temp_c, float), (n,))[:, None], 3, axis=1).copy()
        else:
            temp = np.broadcast_to(np.asarray(initial_temp_c, float), (n, 3)).copy()
        water = np.repeat(coef.water_in[:, None], 3, axis=1).copy()
        enth = tb.enthalpy(temp, water)
        enth0 = (mu * enth).sum(axis=1)
        absorbed = np.zeros(n)
        air_gain = np.zeros(n)
        evap_energy = np.zeros(n)
        evaporated = np.zeros(n)
        cav_loss = np.zeros(n)
        max_temp = temp.max(axis=1)
        hist_t = np.empty((n, s + 1, 3)) if keep_history else None
        hist_w = np.empty((n, s + 1, 3)) if keep_history else None
        if keep_history:
            hist_t[:, 0] = temp
            hist_w[:, 0] = water
        eye = np.eye(3)
        for k in range(s):
            # long stays (a standing belt) are cut into pieces the explicit terms can take
            pieces = max(1, int(np.ceil(np.nanmax(dt_s[:, k], initial=0.0) / MAX_STEP_S)))
            for _ in range(pieces):
                dt = dt_s[:, k] / pieces
                t_air = air_temp_c[:, k]
                loc = tb.locate(temp)
                r = self._rates(coef, temp, water, zone_net_kw[:, k], zone_mass_kg[:, k], t_air, air_rh_pct[:, k], loc)
                cav_loss += r.cavity_w_per_kg_dm * dt
                # evaporation (explicit), dryers only; never below the equilibrium moisture
                if drying:
                    d_water = np.minimum(r.evaporation_per_s * dt[:, None], np.maximum(water - r.water_eq_db, 0.0))
                    e_latent = d_water * tb.latent_heat(temp, loc)
                    e_carried = d_water * tb.water_enthalpy(temp, loc)  # the vapour leaves with its enthalpy
                    water = water - d_water
                else:
                    d_water = e_latent = e_carried = np.zeros_like(temp)
                # heat exchange, implicit in the temperature change u (linearised on dH/dT)
                cap = tb.heat_capacity(temp, water, loc)  # J K-1 per kg dm
                G, air_mu = r.conductance, r.air_w_per_k * mu
                drive = (temp[:, None, :] - temp[:, :, None])  # T_k − T_j at [j, k]
                rhs = dt[:, None] * (mu * r.absorbed_w_per_kg_dm + air_mu * (t_air[:, None] - temp)
                                     + (G * drive).sum(axis=2)) - mu * e_latent
                A = (mu * cap + dt[:, None] * (air_mu + G.sum(axis=2)))[:, :, None] * eye - dt[:, None, None] * G
                u = solve3(A, rhs)
                absorbed += dt * (mu * r.absorbed_w_per_kg_dm).sum(axis=1)
                air_gain += dt * (air_mu * (t_air[:, None] - temp - u)).sum(axis=1)
                evap_energy += (mu * (e_latent + e_carried)).sum(axis=1)
                evaporated += (mu * d_water).sum(axis=1)
                # H = H_dm(T) + X h_w(T): water leaving at T lowers H by d·h_w; the rest is c·u,
                # which already holds the latent heat taken from the product.
                enth = enth - e_carried + cap * u
                temp = tb.temperature(enth, water, guess_c=temp + u)
                if drying and np.any(temp > BOILING_TEMP_C):  # flash off what would lie above boiling
                    h_boil = tb.enthalpy(np.full_like(temp, BOILING_TEMP_C), water)
                    hfg = float(tb.latent_heat(BOILING_TEMP_C))
                    flash = np.minimum(np.maximum(enth - h_boil, 0.0) / hfg, np.maximum(water, 0.0))
                    flash_energy = flash * (hfg + float(tb.water_enthalpy(BOILING_TEMP_C)))
                    water = water - flash
                    enth = enth - flash_energy
                    evap_energy += (mu * flash_energy).sum(axis=1)
                    evaporated += (mu * flash).sum(axis=1)
                    temp = tb.temperature(enth, water, guess_c=np.minimum(temp, BOILING_TEMP_C))
                max_temp = np.maximum(max_temp, temp.max(axis=1))
            if keep_history:
                hist_t[:, k + 1] = temp
                hist_w[:, k + 1] = water
        return Trajectory(temp, water, max_temp, absorbed, air_gain, evap_energy, evaporated,
                          (mu * enth).sum(axis=1) - enth0, cav_loss, hist_t, hist_w)

    def _coefficients(self, n, infeed_water_db, param_overrides=None) -> "_Coefficients":
        pv = dict(self.parameters.values)
        if param_overrides:
            pv.update(param_overrides)

        def col(name, default=None):
            return np.broadcast_to(np.asarray(pv.get(name, default), float), (n,))

        water_in = np.broadcast_to(np.asarray(infeed_water_db, float), (n,))
        return _Coefficients(
            loss_scale=col("loss_factor_scale"), nonuniformity=col("field_nonuniformity"),
            cavity_kg=col("cavity_loss_equiv_kg"), htc=col("air_htc_w_per_m2_k"),
            drying_rate=col("drying_rate_per_s", 0.0), water_in=water_in,
            # top-face area per kg dry matter [m² kg⁻¹]
            area_per_kg_dm=(1.0 + water_in) / (self.tables.density_kg_per_m3 * self.product.piece_thickness_m))

    def _rates(self, coef: "_Coefficients", temp, water, zone_net_kw, zone_mass_kg, air_temp_c, air_rh_pct,
               loc=None) -> "_Rates":
        """Heat and moisture rates of every compartment at the present state (vectorised)."""
        tb = self.tables
        loc = tb.locate(temp) if loc is None else loc
        n = temp.shape[0]
        p_net_w = np.maximum(zone_net_kw, 0.0) * 1e3
        mass_dm = zone_mass_kg / (1.0 + coef.water_in)
        # absorption: split by mass × field weight × loss factor
        e1, e2 = tb.permittivity(temp, water, loc)
        e2 = e2 * coef.loss_scale[:, None]
        outer_e1 = HOT_SHARE * e1[:, HOT] + (1 - HOT_SHARE) * e1[:, COLD]
        outer_e2 = HOT_SHARE * e2[:, HOT] + (1 - HOT_SHARE) * e2[:, COLD]
        g_out, g_core = lambert_field_weights(self.product.piece_thickness_m,
                                              props.penetration_depth_m(outer_e1, outer_e2, tb.frequency_hz))
        a = coef.nonuniformity
        weight = np.stack([g_out * (1 + a), g_out * (1 - a * HOT_SHARE / (1 - HOT_SHARE)), g_core], axis=1)
        loss = weight * e2 * (1.0 + water)  # per kg dm of each compartment
        denom = mass_dm * (MASS_SHARES * loss).sum(axis=1) + coef.cavity_kg
        p_load = np.where(denom > 0, p_net_w / np.where(denom > 0, denom, 1.0), 0.0)
        cavity = np.where(mass_dm > 0, p_load * coef.cavity_kg / np.maximum(mass_dm, 1e-12), 0.0)
        # conduction at the first diffusion mode of each pair's geometry
        kappa = tb.conductivity(temp, water, loc) / tb.density_kg_per_m3 * (1.0 + coef.water_in)[:, None]
        beta_core = 2.0 * np.pi / self.product.piece_thickness_m
        beta_lat = 2.0 * np.pi / self.pattern_period_m
        g_oc = 0.25 * beta_core ** 2 * 0.5 * (kappa[:, CORE, None] + kappa[:, :2])
        G = np.zeros((n, 3, 3))
        G[:, HOT, CORE] = G[:, CORE, HOT] = g_oc[:, 0] * HOT_SHARE
        G[:, COLD, CORE] = G[:, CORE, COLD] = g_oc[:, 1] * (1 - HOT_SHARE)
        G[:, HOT, COLD] = G[:, COLD, HOT] = (beta_lat ** 2 * HOT_SHARE * (1 - HOT_SHARE) / 2
                                             * 0.5 * (kappa[:, HOT] + kappa[:, COLD]))
        air = np.zeros((n, 3))
        air[:, :2] = coef.htc[:, None] * coef.area_per_kg_dm[:, None] / OUTER_MASS_SHARE
        if tb.process == "drying":
            x_eq = _equilibrium_water_db(tb, temp, air_temp_c, air_rh_pct, loc)
            rate = coef.drying_rate[:, None] * np.exp(-DRYING_ACTIVATION_J_PER_MOL / GAS_CONSTANT * (
                1.0 / (temp + 273.15) - 1.0 / (DRYING_REFERENCE_TEMP_C + 273.15)))
            evap = rate * np.maximum(water - x_eq, 0.0)
        else:
            x_eq = evap = np.zeros_like(temp)
        return _Rates(p_load[:, None] * loss, cavity, G, air, evap, x_eq)

    def ode_rhs(self, coef: "_Coefficients", state, zone_net_kw, zone_mass_kg, air_temp_c, air_rh_pct):
        """Time derivative of the state [H (3), X (3)] of parcels, the equations ``integrate`` steps.

        Used by reference solutions (``scipy.integrate.solve_ivp``) and benchmarks; the
        vectorised integrator is the production path.
        """
        tb = self.tables
        enth, water = state[:, :3], state[:, 3:]
        temp = tb.temperature(enth, water)
        r = self._rates(coef, temp, water, zone_net_kw, zone_mass_kg, air_temp_c, air_rh_pct)
        conduction = (r.conductance * (temp[:, None, :] - temp[:, :, None])).sum(axis=2) / MASS_SHARES
        heat = r.absorbed_w_per_kg_dm + r.air_w_per_k * (air_temp_c[:, None] - temp) + conduction
        latent = r.evaporation_per_s * tb.latent_heat(temp)
        carried = r.evaporation_per_s * tb.water_enthalpy(temp)
        return np.concatenate([heat - latent - carried, -r.evaporation_per_s], axis=1)

    def steady(self, *, belt_speed_m_per_min, zone_forward_kw, infeed_temp_c=None,
                belt_load_kg_per_m=None, air_temp_c=None, infeed_moisture_pct_wb=None, air_rh_pct=None,
                keep_history=False, param_overrides=None) -> Outcome:
        """Steady state: every parcel meets the same settings. Inputs broadcast over N candidates.

        ``zone_forward_kw`` has shape (Z,) or (N, Z); the other inputs are scalars or (N,).
        Omitted inputs take the product's typical values.
        """
        typ = self.product.typical
        fwd = np.atleast_2d(np.asarray(zone_forward_kw, dtype=float))
        speed = np.atleast_1d(np.asarray(belt_speed_m_per_min, dtype=float))
        n = max(fwd.shape[0], speed.shape[0], *(np.size(x) for x in (
            infeed_temp_c, belt_load_kg_per_m, air_temp_c, infeed_moisture_pct_wb, air_rh_pct) if x is not None),
                *(np.size(v) for v in (param_overrides or {}).values()))
        fwd = np.broadcast_to(fwd, (n, self.line.zone_count))
        speed = _as_column(speed, n)
        t_in = _as_column(typ.infeed_temp_c if infeed_temp_c is None else infeed_temp_c, n)
        load = _as_column(typ.belt_load_kg_per_m if belt_load_kg_per_m is None else belt_load_kg_per_m, n)
        t_air = _as_column(typ.air_temp_c if air_temp_c is None else air_temp_c, n)
        rh = _as_column(typ.air_rh_pct if air_rh_pct is None else air_rh_pct if air_rh_pct is not None else 20.0, n) \
            if (air_rh_pct is not None or typ.air_rh_pct is not None) else np.full(n, 20.0)
        moist = infeed_moisture_pct_wb if infeed_moisture_pct_wb is not None else typ.infeed_moisture_pct_wb
        water_in = _as_column(self.tables.infeed_water_db(moist), n)
        _, lengths, zones = self._segments
        zone_len = np.asarray(self.line.zone_length_m)
        zone_mass = load[:, None] * zone_len[None, :]  # (N, Z)
        refl = self.reflection.fraction(zone_mass) * fwd
        net = fwd - refl
        v = speed / 60.0
        dt = lengths[None, :] / v[:, None]
        step_net = np.where(zones[None, :] >= 0, net[:, np.maximum(zones, 0)], 0.0)
        step_mass = np.where(zones[None, :] >= 0, zone_mass[:, np.maximum(zones, 0)], 1.0)
        s = lengths.size
        traj = self.integrate(dt_s=dt, zone_net_kw=step_net, zone_mass_kg=step_mass,
                              air_temp_c=np.repeat(t_air[:, None], s, axis=1),
                              air_rh_pct=np.repeat(rh[:, None], s, axis=1), infeed_temp_c=t_in,
                              infeed_water_db=water_in, keep_history=keep_history,
                              param_overrides=param_overrides)
        pv = {**self.parameters.values, **(param_overrides or {})}
        return _model_outcome(self, traj, speed=speed, load=load, infeed_temp_c=t_in, air_temp_c=t_air,
                              residence_s=self.line.tunnel_length_m / v,
                              forward_kw=fwd, reflected_kw=refl, electric_kw=_electric_kw(self, fwd, t_air, pv),
                              water_in_db=water_in)


    def passages(self, *, time_s, belt_speed_m_per_min, zone_forward_kw, infeed_temp_c,
                 belt_load_kg_per_m, air_temp_c, zone_reflected_kw=None, infeed_moisture_pct_wb=None,
                 air_rh_pct=None, rows=None) -> "Passages":
        """What each parcel leaving at each sample time met on its way (inputs of :meth:`run`).

        All inputs are sample records of length T (``zone_forward_kw`` and ``zone_reflected_kw``
        of shape (T, Z)); times strictly increasing [s]. Settings are held from one sample
        to the next. When measured reflected power is given it is used; otherwise the
        reflection relation predicts it. The result depends on the line's geometry and the
        record, not on the parameters, so a fit builds it once and runs it many times.
        ``rows`` selects the outfeed samples whose parcels are wanted (default: all).
        """
        from .transport import passage_times

        t = np.asarray(time_s, dtype=float)
        n = t.size
        fwd = np.nan_to_num(np.asarray(zone_forward_kw, dtype=float).reshape(n, self.line.zone_count), nan=0.0)
        speed = np.nan_to_num(np.asarray(belt_speed_m_per_min, dtype=float), nan=0.0)
        load = np.asarray(belt_load_kg_per_m, dtype=float)
        zone_len = np.asarray(self.line.zone_length_m)
        if zone_reflected_kw is None:
            refl = self.reflection.fraction(load[:, None] * zone_len[None, :]) * fwd
        else:
            refl = np.nan_to_num(np.asarray(zone_reflected_kw, dtype=float).reshape(n, -1), nan=0.0)
        net = fwd - refl
        out_rows = np.arange(n) if rows is None else np.asarray(rows)
        times = passage_times(t, speed, self.step_positions_m, self.line.tunnel_length_m, rows=out_rows)
        ok = np.isfinite(times).all(axis=1)
        times = np.where(ok[:, None], times, t[out_rows][:, None])
        mid = 0.5 * (times[:, 1:] + times[:, :-1])
        idx = np.clip(np.searchsorted(t, mid, side="right") - 1, 0, n - 1)  # sample in force at mid-step
        entry = np.clip(np.searchsorted(t, times[:, 0], side="right") - 1, 0, n - 1)
        hold = (mid - t[idx]).max(axis=1)  # longest a logged value had to stand in for the truth
        zones = self.step_zone
        zi = np.maximum(zones, 0)
        typ = self.product.typical
        rh = np.full(n, 20.0 if typ.air_rh_pct is None else typ.air_rh_pct) if air_rh_pct is None \
            else np.asarray(air_rh_pct, dtype=float)
        t_air = np.asarray(air_temp_c, dtype=float)
        moist = None if infeed_moisture_pct_wb is None else np.asarray(infeed_moisture_pct_wb, float)[entry]
        return Passages(
            dt_s=np.diff(times, axis=1),
            zone_net_kw=np.where(zones[None, :] >= 0, net[idx, zi[None, :]], 0.0),
            zone_mass_kg=np.where(zones[None, :] >= 0, load[entry][:, None] * zone_len[zi][None, :], 1.0),
            air_temp_c=t_air[idx], air_rh_pct=rh[idx],
            infeed_temp_c=np.asarray(infeed_temp_c, float)[entry],
            infeed_water_db=_as_column(self.tables.infeed_water_db(moist), out_rows.size),
            traceable=ok, residence_s=times[:, -1] - times[:, 0], entry_time_s=times[:, 0],
            max_hold_s=hold, belt_speed_m_per_min=speed[out_rows], belt_load_kg_per_m=load[out_rows],
            now_air_temp_c=t_air[out_rows], forward_kw=fwd[out_rows], reflected_kw=refl[out_rows])

    def run(self, passages: "Passages", keep_history=False, param_overrides=None) -> Outcome:
        """The outfeed of the parcels described by ``passages`` (NaN where not traceable)."""
        p = passages
        traj = self.integrate(dt_s=p.dt_s, zone_net_kw=p.zone_net_kw, zone_mass_kg=p.zone_mass_kg,
                              air_temp_c=p.air_temp_c, air_rh_pct=p.air_rh_pct, infeed_temp_c=p.infeed_temp_c,
                              infeed_water_db=p.infeed_water_db, keep_history=keep_history,
                              param_overrides=param_overrides)
        pv = {**self.parameters.values, **(param_overrides or {})}
        out = _model_outcome(self, traj, speed=p.belt_speed_m_per_min, load=p.belt_load_kg_per_m,
                             infeed_temp_c=p.infeed_temp_c, air_temp_c=p.now_air_temp_c,
                             residence_s=p.residence_s, forward_kw=p.forward_kw, reflected_kw=p.reflected_kw,
                             electric_kw=_electric_kw(self, p.forward_kw, p.now_air_temp_c, pv),
                             water_in_db=p.infeed_water_db)
        for name in ("outfeed_temp_mean_c", "outfeed_temp_min_c", "outfeed_temp_max_c", "core_temp_c",
                     "hottest_temp_c", "coldest_temp_c", "hottest_during_passage_c", "mean_temp_c",
                     "outfeed_moisture_pct_wb"):
            value = getattr(out, name)
            if value is not None:
                setattr(out, name, np.where(p.traceable, value, np.nan))
        return out

    def series(self, *, keep_history=False, **record) -> Outcome:
        """Outfeed over time from logged settings: each parcel meets the settings of its own passage.

        Takes the record arguments of :meth:`passages`. Parcels that entered before the
        record starts come out as NaN.
        """
        return self.run(self.passages(**record), keep_history=keep_history)


@dataclass(frozen=True)
class Passages:
    """Per-parcel, per-sub-step inputs of the integrator, from a logged record (arrays (T, S) or (T,))."""

    dt_s: np.ndarray
    zone_net_kw: np.ndarray
    zone_mass_kg: np.ndarray
    air_temp_c: np.ndarray
    air_rh_pct: np.ndarray
    infeed_temp_c: np.ndarray
    infeed_water_db: np.ndarray
    traceable: np.ndarray  # parcel entered after the record started
    residence_s: np.ndarray
    entry_time_s: np.ndarray
    max_hold_s: np.ndarray  # longest gap between a sub-step and the log sample held for it
    belt_speed_m_per_min: np.ndarray  # at the outfeed time (for throughput and energy now)
    belt_load_kg_per_m: np.ndarray
    now_air_temp_c: np.ndarray
    forward_kw: np.ndarray
    reflected_kw: np.ndarray

    def take(self, rows) -> "Passages":
        """The passages of some parcels only (index array or boolean mask)."""
        return Passages(**{k: getattr(self, k)[rows] for k in self.__dataclass_fields__})

    @staticmethod
    def concat(parts: list["Passages"]) -> "Passages":
        return Passages(**{k: np.concatenate([getattr(p, k) for p in parts]) for k in Passages.__dataclass_fields__})

    def __len__(self) -> int:
        return int(self.dt_s.shape[0])


def _equilibrium_water_db(tables: ProductTables, product_temp_c, air_temp_c, air_rh_pct, loc=None):
    """Equilibrium water [kg/kg db] of the product surface in the tunnel air (GAB isotherm).

    The water activity at the surface in equilibrium with the air is
    a_w = RH · p_sat(T_air) / p_sat(T_product) (same vapour pressure), capped at 0.9.
    """
    rh = np.nan_to_num(np.asarray(air_rh_pct, dtype=float), nan=20.0) / 100.0
    p_air = rh * tables.saturation_pressure(np.asarray(air_temp_c, float))
    aw = np.clip(p_air[:, None] / tables.saturation_pressure(product_temp_c, loc), 0.0, 0.9)
    xm, c, kk = GAB_STARCHY
    return xm * c * kk * aw / ((1 - kk * aw) * (1 - kk * aw + c * kk * aw))
