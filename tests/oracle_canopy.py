"""TEST ORACLE: an independent, hand-written numpy implementation of the daily canopy model.

It is written here a second time on purpose, straight from the papers, without the package's equation
functions: for the default parameter sets (C3 FvCB with Bernacchi et al. 2001 kinetics and Kattge & Knorr
2007 peaked Vcmax/Jmax responses; C4 Collatz et al. 1992; Medlyn et al. 2011 stomata, humidity from Tmin
as dew point; FAO-56 astronomy and air pressure; Spitters et al. 1986 daily course and diffuse share;
de Pury & Farquhar 1997 sun/shade canopy; 14 Gauss-Legendre points over daylight and 3 at night),
with the soil's water supply limiting the day as Haxeltine & Prentice 1996 and Sitch et al. 2003 (5 mm d-1
at field capacity; the demand capped at the Priestley & Taylor 1972 energy limit with FAO-56 Rn), vectorised over cells with exact exponentials (no tables, no compiled code). It reads only published
constants from the package. tests/test_kernel.py holds both engines to it within 1e-4; `make bench`
also reports its speed beside the package's numpy engine. It is not used by the package.
"""

from __future__ import annotations

import numpy as np

from suitability.physiology import light
from suitability.physiology.c3 import BERNACCHI_CAPACITY_ACTIVATION, KATTGE_KNORR_2007
from suitability.physiology.params import resolve_params
from suitability.physiology.rubisco import KINETIC_SETS, STANDARD_PRESSURE_KPA
from suitability.physiology.temperature import KELVIN_OFFSET, R_GAS, REFERENCE_TEMPERATURE_K

DAY_POINTS, NIGHT_POINTS = 14, 3
CARBON = 1e-6 * 12.011  # µmol CO2 -> g C


def _arrhenius(tk, activation_energy):
    return np.exp(activation_energy * (tk - REFERENCE_TEMPERATURE_K) / (REFERENCE_TEMPERATURE_K * R_GAS * tk))


def _peaked(tk, activation_energy, deactivation_energy, entropy):
    reference = 1.0 + np.exp((REFERENCE_TEMPERATURE_K * entropy - deactivation_energy) / (REFERENCE_TEMPERATURE_K * R_GAS))
    return _arrhenius(tk, activation_energy) * reference / (1.0 + np.exp((tk * entropy - deactivation_energy) / (R_GAS * tk)))


def _hyperbola(a, b, theta):
    total = a + b
    denominator = total + np.sqrt(np.maximum(total * total - 4.0 * theta * a * b, 0.0))
    return np.where(denominator > 0, 2.0 * a * b / np.where(denominator > 0, denominator, 1.0), 0.0)


def _leaves(temperature, absorbed, vpd, co2_ppm, pressure, o2_pa, c3, c4):
    """C3 (net, gross, photorespiration) and C4 (net, gross) per leaf area [µmol m-2 s-1], and the C3 and
    C4 transpiration [mol H2O m-2 s-1]."""
    tk = temperature + KELVIN_OFFSET
    sqrt_vpd = np.sqrt(vpd)
    # C3: FvCB with Bernacchi (2001) Kc, Ko, Γ* and Kattge & Knorr (2007) capacities
    k = KINETIC_SETS["bernacchi2001"]
    kc = k["kc25_pa"] * _arrhenius(tk, k["kc_activation_energy"])
    ko = k["ko25_pa"] * _arrhenius(tk, k["ko_activation_energy"])
    gamma_star = k["gamma_star25_pa"] * _arrhenius(tk, k["gamma_star_activation_energy"]) * o2_pa / k["o2_reference_pa"]
    kk = KATTGE_KNORR_2007
    tg = c3["growth_temperature_c"]
    vcmax = c3["vcmax25"] * _peaked(tk, kk["vcmax_activation_energy"], kk["deactivation_energy"],
                                    kk["vcmax_entropy_intercept"] + kk["vcmax_entropy_slope"] * tg)
    jmax = c3["jmax25"] * _peaked(tk, kk["jmax_activation_energy"], kk["deactivation_energy"],
                                  kk["jmax_entropy_intercept"] + kk["jmax_entropy_slope"] * tg)
    rd = c3["rd25"] * _arrhenius(tk, BERNACCHI_CAPACITY_ACTIVATION["rd"])
    ci = co2_ppm * c3["g1"] / (c3["g1"] + sqrt_vpd)
    c = ci * pressure * 1e-3
    electron = _hyperbola(absorbed * (1.0 - c3["spectral_correction"]) / 2.0, jmax, c3["theta"])
    rate = np.minimum(vcmax / (c + kc * (1.0 + o2_pa / ko)), electron / (4.0 * c + 8.0 * gamma_star))
    gross3 = rate * (c - gamma_star)
    # C4: Collatz et al. (1992)
    q10 = c4["q10"] ** ((temperature - 25.0) / 10.0)
    enzyme = c4["vmax25"] * q10 / ((1.0 + np.exp(0.3 * (c4["low_temperature_c"] - temperature)))
                                   * (1.0 + np.exp(0.3 * (temperature - c4["high_temperature_c"]))))
    respiration = c4["rd25"] * q10 / (1.0 + np.exp(1.3 * (temperature - c4["respiration_high_temperature_c"])))
    ci4 = co2_ppm * c4["g1"] / (c4["g1"] + sqrt_vpd)
    co2_limited = c4["k25"] * q10 * ci4 * pressure * 1e-3 * (1e3 / STANDARD_PRESSURE_KPA)
    gross4 = _hyperbola(_hyperbola(enzyme, c4["alpha"] * absorbed, c4["theta"]), co2_limited, c4["beta"])
    net3, net4 = gross3 - rd, gross4 - respiration
    # Transpiration with stomata at the Medlyn optimum: gs = 1.6 A/(Ca − Ci), E = gs D/P, shut where A <= 0.
    water3 = np.where((net3 > 0) & (co2_ppm > ci), 1.6 * net3 / np.maximum(co2_ppm - ci, 1e-300) * vpd / pressure, 0.0)
    water4 = np.where((net4 > 0) & (co2_ppm > ci4), 1.6 * net4 / np.maximum(co2_ppm - ci4, 1e-300) * vpd / pressure, 0.0)
    return net3, gross3, rate * gamma_star, net4, gross4, water3, water4


def daily_canopy(tmin, tmax, shortwave, water, latitude, elevation, lai, day_of_year, co2_ppm, o2_percent=20.95):
    """One representative day of every cell: C3 net, gross, photorespiration and C4 net, gross [g C m-2 d-1].

    tmin, tmax [°C], shortwave [MJ m-2 d-1], water [0-1], latitude [°N], elevation [m], lai [m2 m-2]:
    arrays of the same shape; day_of_year [day], co2_ppm [µmol mol-1], o2_percent [%]: scalars.
    """
    c3, c4 = resolve_params("C3"), resolve_params("C4")
    pressure = 101.3 * ((293.0 - 0.0065 * elevation) / 293.0) ** 5.26
    o2_pa = o2_percent * pressure * 10.0
    vapour = 0.6108 * np.exp(17.27 * tmin / (tmin + 237.3))
    declination = 0.409 * np.sin(2 * np.pi * day_of_year / 365.0 - 1.39)
    phi = np.deg2rad(latitude)
    omega = np.arccos(np.clip(-np.tan(phi) * np.tan(declination), -1.0, 1.0))
    a, b = np.sin(phi) * np.sin(declination), np.cos(phi) * np.cos(declination)
    ra = 24 * 60 / np.pi * 0.082 * (1 + 0.033 * np.cos(2 * np.pi * day_of_year / 365.0)) * (omega * a + b * np.sin(omega))
    tau = np.where(ra > 0, shortwave / np.where(ra > 0, ra, 1.0), 0.0)
    fraction = np.where(tau < 0.07, 1.0, np.where(tau < 0.35, 1 - 2.3 * (tau - 0.07) ** 2,
                                                  np.where(tau < 0.75, 1.33 - 1.46 * tau, 0.23)))
    diffuse_daily = fraction * shortwave
    i1 = 24 / np.pi * (a * omega + b * np.sin(omega))
    i2 = 12 / np.pi * (2 * a * a * omega + 4 * a * b * np.sin(omega) + b * b * (omega + np.sin(omega) * np.cos(omega)))
    integral_global = 3600 * (i1 + light.DAILY_COURSE_ATMOSPHERIC_FACTOR * i2)
    integral_diffuse = 3600 * i1
    day_hours = 24 / np.pi * omega
    sigma = light.LEAF_SCATTERING_PAR
    root = np.sqrt(1 - sigma)
    rho_h = (1 - root) / (1 + root)
    kd = light.DIFFUSE_EXTINCTION_BLACK_LEAVES * root
    par_per_w = light.PAR_FRACTION_OF_SHORTWAVE * light.PAR_PHOTONS_PER_JOULE
    totals = [np.zeros_like(tmin, dtype=np.float64) for _ in range(7)]

    def e(k):
        return -np.expm1(-k * lai)

    nodes, weights = np.polynomial.legendre.leggauss(DAY_POINTS)
    for x, w in zip(nodes, weights):
        hour = 12 + 0.5 * day_hours * x
        sinb = a + b * np.cos(np.pi * (hour - 12) / 12)
        up = np.maximum(sinb, 0.0)
        glob = np.where((sinb > 0) & (integral_global > 0),
                        1e6 * shortwave * up * (1 + 0.4 * up) / np.where(integral_global > 0, integral_global, 1.0), 0.0)
        diff = np.minimum(np.where((sinb > 0) & (integral_diffuse > 0),
                                   1e6 * diffuse_daily * up / np.where(integral_diffuse > 0, integral_diffuse, 1.0), 0.0), glob)
        beam, dpar = (glob - diff) * par_per_w, diff * par_per_w
        kb = 0.5 / np.maximum(sinb, light.MIN_SIN_ELEVATION)
        kbs = kb * root
        rho_cb = 1 - np.exp(-2 * rho_h * kb / (1 + kb))
        ab, ad = (1 - rho_cb) * beam, (1 - light.CANOPY_DIFFUSE_REFLECTION_PAR) * dpar
        to_sun_d, to_sun_s = kd / (kd + kb) * e(kd + kb), kbs / (kbs + kb) * e(kbs + kb)
        sunlit = beam * (1 - sigma) * e(kb) + ad * to_sun_d + ab * to_sun_s - beam * (1 - sigma) * e(2 * kb) / 2
        shaded = ad * (e(kd) - to_sun_d) + ab * (e(kbs) - to_sun_s) - beam * (1 - sigma) * (e(kb) - e(2 * kb) / 2)
        l_sun = e(kb) / kb
        l_shade = np.maximum(lai - l_sun, 0.0)
        i_sun = np.where(l_sun > 0, np.maximum(sunlit, 0) / np.where(l_sun > 0, l_sun, 1.0), 0.0)
        i_shade = np.where(l_shade > 0, np.maximum(shaded, 0) / np.where(l_shade > 0, l_shade, 1.0), 0.0)
        temperature = 0.5 * (tmax + tmin) + 0.5 * (tmax - tmin) * np.cos(2 * np.pi * (hour - 14) / 24)
        vpd = np.maximum(0.6108 * np.exp(17.27 * temperature / (temperature + 237.3)) - vapour, 0.0)
        seconds = w * 0.5 * day_hours * 3600
        sun = _leaves(temperature, i_sun, vpd, co2_ppm, pressure, o2_pa, c3, c4)
        shade = _leaves(temperature, i_shade, vpd, co2_ppm, pressure, o2_pa, c3, c4)
        for total, s, h in zip(totals, sun, shade):
            total += seconds * (s * l_sun + h * l_shade)
    nodes, weights = np.polynomial.legendre.leggauss(NIGHT_POINTS)
    for x, w in zip(nodes, weights):
        hour = 0.5 * (24 - day_hours) * x
        temperature = 0.5 * (tmax + tmin) + 0.5 * (tmax - tmin) * np.cos(2 * np.pi * (hour - 14) / 24)
        vpd = np.maximum(0.6108 * np.exp(17.27 * temperature / (temperature + 237.3)) - vapour, 0.0)
        dark = _leaves(temperature, 0.0, vpd, co2_ppm, pressure, o2_pa, c3, c4)
        seconds = w * 0.5 * (24 - day_hours) * 3600
        totals[0] += seconds * dark[0] * lai
        totals[3] += seconds * dark[3] * lai
    # Supply and demand (Haxeltine & Prentice 1996; Sitch et al. 2003): the soil supplies 5 mm d-1 x W;
    # where the day's transpiration (mol H2O m-2 x 18.015 g mol-1 = mm) exceeds it, gross and
    # photorespiration scale by supply/demand and respiration goes on.
    supply = 5.0 * water
    # Demand capped at the energy limit: Priestley & Taylor (1972) alpha 1.26 with FAO-56 Rn (eqs. 37-40),
    # slope of e° (eq. 13) at the daily mean, gamma (eq. 8), lambda 2.45 MJ kg-1.
    rso = (0.75 + 2e-5 * elevation) * ra
    relative = np.where(rso > 0, np.minimum(shortwave / np.where(rso > 0, rso, 1.0), 1.0), 0.5)
    rnl = 4.903e-9 * ((tmax + 273.16) ** 4 + (tmin + 273.16) ** 4) / 2 * (0.34 - 0.14 * np.sqrt(vapour)) * (
        1.35 * relative - 0.35)
    rn = 0.77 * shortwave - rnl
    mean = (tmin + tmax) / 2
    delta = 4098 * 0.6108 * np.exp(17.27 * mean / (mean + 237.3)) / (mean + 237.3) ** 2
    energy_limit = 1.26 * delta / (delta + 0.665e-3 * pressure) * np.maximum(rn, 0.0) / 2.45
    for net, gross, photo, transpired in ((0, 1, 2, 5), (3, 4, None, 6)):
        demand = np.minimum(totals[transpired] * 18.015e-3, energy_limit)
        share = np.where(demand > supply, supply / np.where(demand > supply, demand, 1.0), 1.0)
        totals[net] = totals[net] - (1.0 - share) * totals[gross]
        totals[gross] = share * totals[gross]
        if photo is not None:
            totals[photo] = share * totals[photo]
    valid = np.isfinite(tmin) & np.isfinite(tmax) & np.isfinite(shortwave) & np.isfinite(water) & np.isfinite(lai)
    return tuple(np.where(valid, total * CARBON, np.nan) for total in totals[:5])


def monthly_canopy(cells: dict, day_of_year, co2_ppm) -> np.ndarray:
    """:func:`daily_canopy` for the 12 months of cell inputs (benchmarks.synthetic.cell_inputs);
    returns (5, n, 12) float64 in the order of :func:`daily_canopy`."""
    out = np.empty((5,) + cells["tmin"].shape)
    lai = np.full(cells["latitude"].shape, 3.0)
    f64 = lambda v: np.asarray(v, np.float64)  # noqa: E731
    with np.errstate(all="ignore"):
        for month in range(12):
            values = daily_canopy(f64(cells["tmin"][:, month]), f64(cells["tmax"][:, month]),
                                  f64(cells["shortwave"][:, month]), f64(cells["water_availability"][:, month]),
                                  f64(cells["latitude"]), f64(cells["elevation"]), lai, float(day_of_year[month]),
                                  co2_ppm)
            for field, value in enumerate(values):
                out[field, :, month] = value
    return out
