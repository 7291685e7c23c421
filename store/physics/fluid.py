"""Kinematic viscosity of a hydraulic fluid at temperature.

ASTM D341 (Walther) for the viscosity-temperature curve, ASTM D2270 for the viscosity index
and ISO 3448 for the ISO VG grades. Viscosities are kinematic, in mm²/s (= cSt).
"""

from __future__ import annotations

import math
from bisect import bisect_left

from store.base.errors import BookError
from store.base.records import frozen_record

KELVIN_OFFSET = 273.15
MIN_NU_CST = 2.0  # ASTM D341: below this the simple Walther form (Z = ν + 0.7) does not hold
TEMP_MIN_C = -40.0  # sensible range for a mineral hydraulic oil in service
TEMP_MAX_C = 150.0
ASSUMED_VI = 100.0

ISO_VG_GRADES = (2, 3, 5, 7, 10, 15, 22, 32, 46, 68, 100, 150, 220, 320, 460, 680, 1000, 1500)


class FluidRangeError(BookError):
    """Viscosity or temperature outside where the viscosity maths holds."""


# ASTM D2270 Table 1: ν100 (mm²/s), L and H (ν40 of the VI 0 and VI 100 reference oils, mm²/s).
# Linear interpolation between rows is what the standard prescribes.
# fmt: off
_D2270_TABLE: tuple[tuple[float, float, float], ...] = (
    (2.0, 7.994, 6.394), (2.1, 8.64, 6.894), (2.2, 9.309, 7.41), (2.3, 10.0, 7.944),
    (2.4, 10.71, 8.496), (2.5, 11.45, 9.063), (2.6, 12.21, 9.647), (2.7, 13.0, 10.25),
    (2.8, 13.8, 10.87), (2.9, 14.63, 11.5), (3.0, 15.49, 12.15), (3.1, 16.36, 12.82),
    (3.2, 17.26, 13.51), (3.3, 18.18, 14.21), (3.4, 19.12, 14.93), (3.5, 20.09, 15.66),
    (3.6, 21.08, 16.42), (3.7, 22.09, 17.19), (3.8, 23.13, 17.97), (3.9, 24.19, 18.77),
    (4.0, 25.32, 19.56), (4.1, 26.5, 20.37), (4.2, 27.75, 21.21), (4.3, 29.07, 22.05),
    (4.4, 30.48, 22.92), (4.5, 31.96, 23.81), (4.6, 33.52, 24.71), (4.7, 35.13, 25.63),
    (4.8, 36.79, 26.57), (4.9, 38.5, 27.53), (5.0, 40.23, 28.49), (5.1, 41.99, 29.46),
    (5.2, 43.76, 30.43), (5.3, 45.53, 31.4), (5.4, 47.31, 32.37), (5.5, 49.09, 33.34),
    (5.6, 50.87, 34.32), (5.7, 52.64, 35.29), (5.8, 54.42, 36.26), (5.9, 56.2, 37.23),
    (6.0, 57.97, 38.19), (6.1, 59.74, 39.17), (6.2, 61.52, 40.15), (6.3, 63.32, 41.13),
    (6.4, 65.18, 42.14), (6.5, 67.12, 43.18), (6.6, 69.16, 44.24), (6.7, 71.29, 45.33),
    (6.8, 73.48, 46.44), (6.9, 75.72, 47.51), (7.0, 78.0, 48.57), (7.1, 80.25, 49.61),
    (7.2, 82.39, 50.69), (7.3, 84.53, 51.78), (7.4, 86.66, 52.88), (7.5, 88.85, 53.98),
    (7.6, 91.04, 55.09), (7.7, 93.2, 56.2), (7.8, 95.43, 57.31), (7.9, 97.72, 58.45),
    (8.0, 100.0, 59.6), (8.1, 102.3, 60.74), (8.2, 104.6, 61.89), (8.3, 106.9, 63.05),
    (8.4, 109.2, 64.18), (8.5, 111.5, 65.32), (8.6, 113.9, 66.48), (8.7, 116.2, 67.64),
    (8.8, 118.5, 68.79), (8.9, 120.9, 69.94), (9.0, 123.3, 71.1), (9.1, 125.7, 72.27),
    (9.2, 128.0, 73.42), (9.3, 130.4, 74.57), (9.4, 132.8, 75.73), (9.5, 135.3, 76.91),
    (9.6, 137.7, 78.08), (9.7, 140.1, 79.27), (9.8, 142.7, 80.46), (9.9, 145.2, 81.67),
    (10.0, 147.7, 82.87), (10.1, 150.3, 84.08), (10.2, 152.9, 85.3), (10.3, 155.4, 86.51),
    (10.4, 158.0, 87.72), (10.5, 160.6, 88.95), (10.6, 163.2, 90.19), (10.7, 165.8, 91.4),
    (10.8, 168.5, 92.65), (10.9, 171.2, 93.92), (11.0, 173.9, 95.19), (11.1, 176.6, 96.45),
    (11.2, 179.4, 97.71), (11.3, 182.1, 98.97), (11.4, 184.9, 100.2), (11.5, 187.6, 101.5),
    (11.6, 190.4, 102.8), (11.7, 193.3, 104.1), (11.8, 196.2, 105.4), (11.9, 199.0, 106.7),
    (12.0, 201.9, 108.0), (12.1, 204.8, 109.4), (12.2, 207.8, 110.7), (12.3, 210.7, 112.0),
    (12.4, 213.6, 113.3), (12.5, 216.6, 114.7), (12.6, 219.6, 116.0), (12.7, 222.6, 117.4),
    (12.8, 225.7, 118.7), (12.9, 228.8, 120.1), (13.0, 231.9, 121.5), (13.1, 235.0, 122.9),
    (13.2, 238.1, 124.2), (13.3, 241.2, 125.6), (13.4, 244.3, 127.0), (13.5, 247.4, 128.4),
    (13.6, 250.6, 129.8), (13.7, 253.8, 131.2), (13.8, 257.0, 132.6), (13.9, 260.1, 134.0),
    (14.0, 263.3, 135.4), (14.1, 266.6, 136.8), (14.2, 269.8, 138.2), (14.3, 273.0, 139.6),
    (14.4, 276.3, 141.0), (14.5, 279.6, 142.4), (14.6, 283.0, 143.9), (14.7, 286.4, 145.3),
    (14.8, 289.7, 146.8), (14.9, 293.0, 148.2), (15.0, 296.5, 149.7), (15.1, 300.0, 151.2),
    (15.2, 303.4, 152.6), (15.3, 306.9, 154.1), (15.4, 310.3, 155.6), (15.5, 313.9, 157.0),
    (15.6, 317.5, 158.6), (15.7, 321.1, 160.1), (15.8, 324.6, 161.6), (15.9, 328.3, 163.1),
    (16.0, 331.9, 164.6), (16.1, 335.5, 166.1), (16.2, 339.2, 167.7), (16.3, 342.9, 169.2),
    (16.4, 346.6, 170.7), (16.5, 350.3, 172.3), (16.6, 354.1, 173.8), (16.7, 358.0, 175.4),
    (16.8, 361.7, 177.0), (16.9, 365.6, 178.6), (17.0, 369.4, 180.2), (17.1, 373.3, 181.7),
    (17.2, 377.1, 183.3), (17.3, 381.0, 184.9), (17.4, 384.9, 186.5), (17.5, 388.9, 188.1),
    (17.6, 392.7, 189.7), (17.7, 396.7, 191.3), (17.8, 400.7, 192.9), (17.9, 404.6, 194.6),
    (18.0, 408.6, 196.2), (18.1, 412.6, 197.8), (18.2, 416.7, 199.4), (18.3, 420.7, 201.0),
    (18.4, 424.9, 202.6), (18.5, 429.0, 204.3), (18.6, 433.2, 205.9), (18.7, 437.3, 207.6),
    (18.8, 441.5, 209.3), (18.9, 445.7, 211.0), (19.0, 449.9, 212.7), (19.1, 454.2, 214.4),
    (19.2, 458.4, 216.1), (19.3, 462.7, 217.7), (19.4, 467.0, 219.4), (19.5, 471.3, 221.1),
    (19.6, 475.7, 222.8), (19.7, 479.7, 224.5), (19.8, 483.9, 226.2), (19.9, 488.6, 227.7),
    (20.0, 493.2, 229.5), (20.2, 501.5, 233.0), (20.4, 510.8, 236.4), (20.6, 519.9, 240.1),
    (20.8, 528.8, 243.5), (21.0, 538.4, 247.1), (21.2, 547.5, 250.7), (21.4, 556.7, 254.2),
    (21.6, 566.4, 257.8), (21.8, 575.6, 261.5), (22.0, 585.2, 264.9), (22.2, 595.0, 268.6),
    (22.4, 604.3, 272.3), (22.6, 614.2, 275.8), (22.8, 624.1, 279.6), (23.0, 633.6, 283.3),
    (23.2, 643.4, 286.8), (23.4, 653.8, 290.5), (23.6, 663.3, 294.4), (23.8, 673.7, 297.9),
    (24.0, 683.9, 301.8), (24.2, 694.5, 305.6), (24.4, 704.2, 309.4), (24.6, 714.9, 313.0),
    (24.8, 725.7, 317.0), (25.0, 736.5, 320.9), (25.2, 747.2, 324.9), (25.4, 758.2, 328.8),
    (25.6, 769.3, 332.7), (25.8, 779.7, 336.7), (26.0, 790.4, 340.5), (26.2, 801.6, 344.4),
    (26.4, 812.8, 348.4), (26.6, 824.1, 352.3), (26.8, 835.5, 356.4), (27.0, 847.0, 360.5),
    (27.2, 857.5, 364.6), (27.4, 869.0, 368.3), (27.6, 880.6, 372.3), (27.8, 892.3, 376.4),
    (28.0, 904.1, 380.6), (28.2, 915.8, 384.6), (28.4, 927.6, 388.8), (28.6, 938.6, 393.0),
    (28.8, 951.2, 396.6), (29.0, 963.4, 401.1), (29.2, 975.4, 405.3), (29.4, 987.1, 409.5),
    (29.6, 998.9, 413.5), (29.8, 1011, 417.6), (30.0, 1023, 421.7), (30.5, 1055, 432.4),
    (31.0, 1086, 443.2), (31.5, 1119, 454.0), (32.0, 1151, 464.9), (32.5, 1184, 475.9),
    (33.0, 1217, 487.0), (33.5, 1251, 498.1), (34.0, 1286, 509.6), (34.5, 1321, 521.1),
    (35.0, 1356, 532.5), (35.5, 1391, 544.0), (36.0, 1427, 555.6), (36.5, 1464, 567.1),
    (37.0, 1501, 579.3), (37.5, 1538, 591.3), (38.0, 1575, 603.1), (38.5, 1613, 615.0),
    (39.0, 1651, 627.1), (39.5, 1691, 639.2), (40.0, 1730, 651.8), (40.5, 1770, 664.2),
    (41.0, 1810, 676.6), (41.5, 1851, 689.1), (42.0, 1892, 701.9), (42.5, 1935, 714.9),
    (43.0, 1978, 728.2), (43.5, 2021, 741.3), (44.0, 2064, 754.4), (44.5, 2108, 767.6),
    (45.0, 2152, 780.9), (45.5, 2197, 794.5), (46.0, 2243, 808.2), (46.5, 2288, 821.9),
    (47.0, 2333, 835.5), (47.5, 2380, 849.2), (48.0, 2426, 863.0), (48.5, 2473, 876.9),
    (49.0, 2521, 890.9), (49.5, 2570, 905.3), (50.0, 2618, 919.6), (50.5, 2667, 933.6),
    (51.0, 2717, 948.2), (51.5, 2767, 962.9), (52.0, 2817, 977.5), (52.5, 2867, 992.1),
    (53.0, 2918, 1007), (53.5, 2969, 1021), (54.0, 3020, 1036), (54.5, 3073, 1051),
    (55.0, 3126, 1066), (55.5, 3180, 1082), (56.0, 3233, 1097), (56.5, 3286, 1112),
    (57.0, 3340, 1127), (57.5, 3396, 1143), (58.0, 3452, 1159), (58.5, 3507, 1175),
    (59.0, 3563, 1190), (59.5, 3619, 1206), (60.0, 3676, 1222), (60.5, 3734, 1238),
    (61.0, 3792, 1254), (61.5, 3850, 1270), (62.0, 3908, 1286), (62.5, 3966, 1303),
    (63.0, 4026, 1319), (63.5, 4087, 1336), (64.0, 4147, 1352), (64.5, 4207, 1369),
    (65.0, 4268, 1386), (65.5, 4329, 1402), (66.0, 4392, 1419), (66.5, 4455, 1436),
    (67.0, 4517, 1454), (67.5, 4580, 1471), (68.0, 4645, 1488), (68.5, 4709, 1506),
    (69.0, 4773, 1523), (69.5, 4839, 1541), (70.0, 4905, 1558),
)
# fmt: on
_D2270_NU100 = tuple(row[0] for row in _D2270_TABLE)


def _check_positive(name: str, value: float) -> None:
    if not (math.isfinite(value) and value > 0):
        raise FluidRangeError(f"{name} must be a positive number of mm²/s, got {value!r}")


def _check_temp(temp_c: float) -> None:
    if not (math.isfinite(temp_c) and TEMP_MIN_C <= temp_c <= TEMP_MAX_C):
        raise FluidRangeError(
            f"fluid temperature {temp_c!r} °C is outside {TEMP_MIN_C:g}…{TEMP_MAX_C:g} °C"
        )


def _loglog_z(nu_cst: float) -> float:
    return math.log10(math.log10(nu_cst + 0.7))


def walther_coefficients(nu40_cst: float, nu100_cst: float) -> tuple[float, float]:
    """A and B of ASTM D341, log10(log10(ν + 0.7)) = A − B·log10(T/K), through ν40 and ν100."""
    _check_positive("ν40", nu40_cst)
    _check_positive("ν100", nu100_cst)
    if nu100_cst < MIN_NU_CST:
        raise FluidRangeError(
            f"ν100 {nu100_cst:g} mm²/s is below {MIN_NU_CST:g}, "
            "where the simple Walther form does not hold"
        )
    if nu40_cst <= nu100_cst:
        raise FluidRangeError(f"ν40 ({nu40_cst:g}) must be larger than ν100 ({nu100_cst:g}) mm²/s")
    log_t40 = math.log10(40.0 + KELVIN_OFFSET)
    log_t100 = math.log10(100.0 + KELVIN_OFFSET)
    b = (_loglog_z(nu40_cst) - _loglog_z(nu100_cst)) / (log_t100 - log_t40)
    a = _loglog_z(nu40_cst) + b * log_t40
    return a, b


def viscosity_cst(temp_c: float, nu40_cst: float, nu100_cst: float) -> float:
    """Kinematic viscosity at temp_c from the Walther curve through ν40 and ν100."""
    a, b = walther_coefficients(nu40_cst, nu100_cst)
    _check_temp(temp_c)
    nu = 10.0 ** (10.0 ** (a - b * math.log10(temp_c + KELVIN_OFFSET))) - 0.7
    if nu < MIN_NU_CST:
        raise FluidRangeError(
            f"viscosity at {temp_c:g} °C works out at {nu:.2f} mm²/s, below {MIN_NU_CST:g}, "
            "where the simple Walther form does not hold"
        )
    return nu


def temp_for_viscosity_c(nu_cst: float, nu40_cst: float, nu100_cst: float) -> float:
    """Temperature (°C) at which the Walther curve through ν40 and ν100 reaches nu_cst."""
    a, b = walther_coefficients(nu40_cst, nu100_cst)
    _check_positive("viscosity", nu_cst)
    if nu_cst < MIN_NU_CST:
        raise FluidRangeError(
            f"{nu_cst:g} mm²/s is below {MIN_NU_CST:g}, where the simple Walther form does not hold"
        )
    temp_c = 10.0 ** ((a - _loglog_z(nu_cst)) / b) - KELVIN_OFFSET
    if not TEMP_MIN_C - 1e-6 <= temp_c <= TEMP_MAX_C + 1e-6:  # allow float round-off
        raise FluidRangeError(
            f"this fluid reaches {nu_cst:g} mm²/s only at {temp_c:.0f} °C, "
            f"outside {TEMP_MIN_C:g}…{TEMP_MAX_C:g} °C"
        )
    return temp_c


def _l_and_h(nu100_cst: float) -> tuple[float, float]:
    """L and H of ASTM D2270 for a sample with this ν100."""
    if nu100_cst > 70.0:
        # ASTM D2270 cl. 5.1.2 / 6.1.2, for ν100 above the table
        low = 0.8353 * nu100_cst**2 + 14.67 * nu100_cst - 216.0
        high = 0.1684 * nu100_cst**2 + 11.85 * nu100_cst - 97.0
        return low, high
    i = bisect_left(_D2270_NU100, nu100_cst)
    if _D2270_NU100[i] == nu100_cst:
        return _D2270_TABLE[i][1], _D2270_TABLE[i][2]
    (x0, l0, h0), (x1, l1, h1) = _D2270_TABLE[i - 1], _D2270_TABLE[i]
    frac = (nu100_cst - x0) / (x1 - x0)
    return l0 + frac * (l1 - l0), h0 + frac * (h1 - h0)


def viscosity_index(nu40_cst: float, nu100_cst: float) -> float:
    """Viscosity index per ASTM D2270 (not rounded)."""
    _check_positive("ν40", nu40_cst)
    _check_positive("ν100", nu100_cst)
    if nu100_cst < MIN_NU_CST:
        raise FluidRangeError(f"VI is not defined for ν100 below {MIN_NU_CST:g} mm²/s")
    low, high = _l_and_h(nu100_cst)
    if nu40_cst >= high:  # procedure A (VI up to 100)
        return (low - nu40_cst) / (low - high) * 100.0
    # procedure B (VI above 100)
    n = (math.log10(high) - math.log10(nu40_cst)) / math.log10(nu100_cst)
    return (10.0**n - 1.0) / 0.00715 + 100.0


def nu100_from_vi(nu40_cst: float, vi: float) -> float:
    """ν100 that gives this VI together with ν40 (ASTM D2270 solved for ν100)."""
    _check_positive("ν40", nu40_cst)
    if not math.isfinite(vi):
        raise FluidRangeError(f"viscosity index must be a number, got {vi!r}")

    def gap(nu100: float) -> float:
        return viscosity_index(nu40_cst, nu100) - vi

    low, high = MIN_NU_CST, 70.0
    if gap(low) > 0 or gap(high) < 0:
        raise FluidRangeError(
            f"no ν100 between {low:g} and {high:g} mm²/s gives VI {vi:g} with ν40 {nu40_cst:g}"
        )
    from scipy.optimize import brentq  # imported here: every command loads this module

    return float(brentq(gap, low, high, xtol=1e-10, rtol=1e-12))


def iso_vg_limits(grade: int) -> tuple[float, float, float]:
    """(min, mid, max) ν40 in mm²/s of an ISO 3448 viscosity grade (midpoint ±10 %)."""
    if grade not in ISO_VG_GRADES:
        raise BookError(f"ISO VG {grade!r} is not a standard grade")
    mid = float(grade)
    return round(0.9 * mid, 6), mid, round(1.1 * mid, 6)


@frozen_record
class FluidSpec:
    """What is known about a fluid, as typed from its data sheet."""

    name: str
    iso_vg: int | None = None
    nu40_cst: float | None = None
    nu100_cst: float | None = None
    vi: float | None = None


@frozen_record
class ViscosityCurve:
    """A Walther curve through ν40 and ν100, with how those two were found."""

    nu40_cst: float
    nu100_cst: float
    estimated: bool
    basis: str

    def __post_init__(self) -> None:
        walther_coefficients(self.nu40_cst, self.nu100_cst)

    def nu_cst(self, temp_c: float) -> float:
        """Kinematic viscosity at temp_c."""
        return viscosity_cst(temp_c, self.nu40_cst, self.nu100_cst)

    def temp_c(self, nu_cst: float) -> float:
        """Temperature at which the fluid has viscosity nu_cst."""
        return temp_for_viscosity_c(nu_cst, self.nu40_cst, self.nu100_cst)


def resolve_curve(spec: FluidSpec) -> ViscosityCurve:
    """Best viscosity curve from what is known: ν40+ν100, then ν40+VI, then ISO VG midpoint."""
    estimated = False
    nu40 = spec.nu40_cst
    where40 = "ν40"
    if nu40 is None:
        if spec.iso_vg is None:
            raise BookError(f"fluid {spec.name!r} needs ν40 or an ISO VG grade")
        nu40 = iso_vg_limits(spec.iso_vg)[1]
        where40 = f"ISO VG {spec.iso_vg} midpoint"
        estimated = True
    if spec.nu100_cst is not None:
        nu100 = spec.nu100_cst
        basis = f"{where40} and ν100"
    elif spec.vi is not None:
        nu100 = nu100_from_vi(nu40, spec.vi)
        basis = f"{where40} and VI"
    else:
        nu100 = nu100_from_vi(nu40, ASSUMED_VI)
        basis = f"{where40}, VI {ASSUMED_VI:g} assumed"
        estimated = True
    if estimated:
        basis += " (estimate)"
    return ViscosityCurve(nu40, nu100, estimated, basis)
