#!/usr/bin/env python3
"""The reference a lab already has: a vectorized numpy/pandas reduction of van der Pauw
readings, as a careful lab scripter writes it, timed on the readings of the `hall_reduce`
benchmark.

Usage: hall_reduce_peer.py DIRECTORY [REPETITIONS]

DIRECTORY holds the readings as raw little-endian columns (`<name>.bin`) and `meta.json`
(the row count, the sample names and their thickness and Hall factor, and the rows whose
densities the benchmark wants to compare). Reading the files is not timed; the reduction
is, REPETITIONS times (default 5) after one untimed warm-up, and the script prints one JSON
line: the median and fastest time in seconds, the number of rows, and the densities of the
requested rows.

The reduction (what a lab script does, with the same physics as `hall.reduce`):

1. Canonical orientation: the current contacts name the configuration (van der Pauw:
   R_21,34, R_43,12, R_32,41, R_14,23 and the two diagonals); I and V take the sign that
   puts the reading in the configuration's canonical orientation (NIST Hall-effect pages).
2. Temperature groups per sample: sorted temperatures chained while neighbours are within
   0.5 K and 5 % of the temperature. |B| <= 10 mT is zero field.
3. Per (group, configuration, field sign): least squares V = R I + V_offset (centred sums,
   two passes), R's standard error from the residuals.
4. R_A, R_B the means of the direct and reciprocal configurations at zero field; R_s from
   van der Pauw's equation exp(-pi R_A / R_s) + exp(-pi R_B / R_s) = 1 (L. J. van der
   Pauw, Philips Res. Rep. 13, 1958), solved by vectorized Newton iteration in z = pi / R_s.
5. Hall: per diagonal and current polarity the field-odd part (V/I(+B) - V/I(-B)) / 2,
   their mean R_xy, R_Hs = R_xy / |B|, n = r_H / (e |R_Hs| t), mu_H = |R_Hs| / R_s, with
   standard errors from the fits and the spread of the redundant configurations.
"""

import json
import os
import sys
import time

try:
    import numpy as np
    import pandas as pd
except ImportError as missing:  # the benchmark reports the peer as absent
    print(json.dumps({"error": f"numpy and pandas are needed: {missing}"}))
    sys.exit(2)

ELEMENTARY_CHARGE_C = 1.602176634e-19
TEMPERATURE_TOLERANCE_K = 0.5
TEMPERATURE_RELATIVE_GAP = 0.05
ZERO_FIELD_TOLERANCE_T = 1e-2

# Van der Pauw configurations by current pair (lower contact, higher contact):
# slot 0 R_21,34, 1 R_43,12, 2 R_32,41, 3 R_14,23, 4 Hall with I_13, 5 Hall with I_24.
SLOT_OF_PAIR = np.full((5, 5), -1, dtype=np.int8)
for (low, high), slot in {(1, 2): 0, (3, 4): 1, (2, 3): 2, (1, 4): 3, (1, 3): 4, (2, 4): 5}.items():
    SLOT_OF_PAIR[low, high] = slot
CANONICAL_IN = np.array([2, 4, 3, 1, 1, 2], dtype=np.int64)
CANONICAL_POSITIVE = np.array([3, 1, 4, 2, 2, 3], dtype=np.int64)
SLOTS = 6


def load(directory):
    with open(os.path.join(directory, "meta.json"), encoding="utf-8") as handle:
        meta = json.load(handle)
    rows = meta["rows"]

    def column(name, dtype):
        values = np.fromfile(os.path.join(directory, f"{name}.bin"), dtype=dtype)
        if values.size != rows:
            raise SystemExit(f"{name}.bin holds {values.size} values, {rows} expected")
        return values

    frame = pd.DataFrame(
        {
            # The sample as a categorical, as pandas reads a repeated text column best.
            "sample": pd.Categorical.from_codes(column("sample_index", "<u4").astype(np.int32), meta["samples"]),
            "temperature_K": column("temperature_K", "<f8"),
            "field_T": column("field_T", "<f8"),
            "i_in": column("i_in", "<i8"),
            "i_out": column("i_out", "<i8"),
            "v_pos": column("v_pos", "<i8"),
            "v_neg": column("v_neg", "<i8"),
            "current_A": column("current_A", "<f8"),
            "voltage_V": column("voltage_V", "<f8"),
        }
    )
    sheet = pd.DataFrame(
        {"sample": meta["samples"], "thickness_m": meta["thickness_m"], "hall_factor": meta["hall_factor"]}
    )
    return frame, sheet, meta


def van_der_pauw_sheet_resistance(resistance_a, resistance_b):
    """R_s solving exp(-pi a / R_s) + exp(-pi b / R_s) = 1 for arrays of a, b > 0."""
    scale = np.maximum(resistance_a, resistance_b)
    a = resistance_a / scale
    b = resistance_b / scale
    # g(z) = exp(-z a) + exp(-z b) - 1 is convex and decreasing; Newton from z = ln 2,
    # left of the root, converges monotonically.
    z = np.full_like(a, np.log(2.0))
    for _ in range(50):
        ea = np.exp(-z * a)
        eb = np.exp(-z * b)
        step = (ea + eb - 1.0) / (a * ea + b * eb)
        z = z + step
        if np.all(np.abs(step) <= 1e-15 * z):
            break
    sheet = np.pi * scale / z
    # Implicit differentiation for the gradient (dR_s/dR_A, dR_s/dR_B).
    ta = np.exp(-np.pi * resistance_a / sheet)
    tb = np.exp(-np.pi * resistance_b / sheet)
    denominator = resistance_a * ta + resistance_b * tb
    return sheet, sheet * ta / denominator, sheet * tb / denominator


def reduce(frame, sheet):
    codes = frame["sample"].cat.codes.to_numpy()
    temperature = frame["temperature_K"].to_numpy()
    field = frame["field_T"].to_numpy()
    i_in = frame["i_in"].to_numpy()
    i_out = frame["i_out"].to_numpy()
    v_pos = frame["v_pos"].to_numpy()
    current = frame["current_A"].to_numpy()
    voltage = frame["voltage_V"].to_numpy()

    # 1. Canonical orientation.
    slot = SLOT_OF_PAIR[np.minimum(i_in, i_out), np.maximum(i_in, i_out)].astype(np.int64)
    if np.any(slot < 0):
        raise SystemExit("a reading's current contacts are not a van der Pauw configuration")
    current_c = np.where(i_in == CANONICAL_IN[slot], current, -current)
    voltage_c = np.where(v_pos == CANONICAL_POSITIVE[slot], voltage, -voltage)

    # 2. Temperature groups: sort by sample and temperature, cut at gaps.
    order = np.lexsort((temperature, codes))
    codes_s = codes[order]
    temperature_s = temperature[order]
    gap = np.diff(temperature_s) > np.minimum(TEMPERATURE_TOLERANCE_K, TEMPERATURE_RELATIVE_GAP * temperature_s[:-1])
    new_group = np.empty(order.size, dtype=bool)
    new_group[0] = True
    new_group[1:] = gap | (codes_s[1:] != codes_s[:-1])
    group_s = np.cumsum(new_group) - 1
    group = np.empty_like(group_s)
    group[order] = group_s
    group_count = int(group_s[-1]) + 1
    group_sample = codes_s[new_group]
    group_temperature = np.bincount(group, weights=temperature, minlength=group_count) / np.bincount(
        group, minlength=group_count
    )

    abs_field = np.abs(field)
    in_field = abs_field > ZERO_FIELD_TOLERANCE_T
    negative_field = in_field & (field < 0.0)

    # 3. Least squares per cell: (group, configuration, field sign), zero field apart.
    field_state = np.where(in_field, np.where(negative_field, 2, 1), 0)
    cell = (group * SLOTS + slot) * 3 + field_state
    cell_count = group_count * SLOTS * 3
    n = np.bincount(cell, minlength=cell_count).astype(np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_i = np.bincount(cell, weights=current_c, minlength=cell_count) / n
        mean_v = np.bincount(cell, weights=voltage_c, minlength=cell_count) / n
        dx = current_c - mean_i[cell]
        dy = voltage_c - mean_v[cell]
        sxx = np.bincount(cell, weights=dx * dx, minlength=cell_count)
        sxy = np.bincount(cell, weights=dx * dy, minlength=cell_count)
        slope = sxy / sxx
        residual = dy - slope[cell] * dx
        rss = np.bincount(cell, weights=residual * residual, minlength=cell_count)
        slope_se = np.sqrt(rss / (n - 2.0) / sxx)
    slope = slope.reshape(group_count, SLOTS, 3)
    slope_se = slope_se.reshape(group_count, SLOTS, 3)

    # 4. Resistances and van der Pauw.
    resistance_a = 0.5 * (slope[:, 0, 0] + slope[:, 1, 0])
    resistance_b = 0.5 * (slope[:, 2, 0] + slope[:, 3, 0])
    resistance_a_se = 0.5 * np.hypot(slope_se[:, 0, 0], slope_se[:, 1, 0])
    resistance_b_se = 0.5 * np.hypot(slope_se[:, 2, 0], slope_se[:, 3, 0])
    sheet_resistance, gradient_a, gradient_b = van_der_pauw_sheet_resistance(resistance_a, resistance_b)
    sheet_resistance_se = np.hypot(gradient_a * resistance_a_se, gradient_b * resistance_b_se)

    # 5. Hall: mean V/I per (group, diagonal, field sign, current polarity).
    hall = in_field & (slot >= 4)
    hall_cell = ((group[hall] * 2 + (slot[hall] - 4)) * 2 + negative_field[hall]) * 2 + (current_c[hall] < 0.0)
    hall_cells = group_count * 8
    hall_n = np.bincount(hall_cell, minlength=hall_cells)
    ratio = np.bincount(hall_cell, weights=voltage_c[hall] / current_c[hall], minlength=hall_cells) / hall_n
    ratio = ratio.reshape(group_count, 2, 2, 2)
    odd = 0.5 * (ratio[:, :, 0, :] - ratio[:, :, 1, :]).reshape(group_count, 4)
    hall_resistance = odd.mean(axis=1)
    hall_resistance_se = odd.std(axis=1, ddof=1) / 2.0
    field_group = np.bincount(group[hall], weights=abs_field[hall], minlength=group_count) / np.bincount(
        group[hall], minlength=group_count
    )
    sheet_hall = hall_resistance / field_group
    sheet_hall_se = hall_resistance_se / field_group

    thickness = sheet["thickness_m"].to_numpy()[group_sample]
    hall_factor = sheet["hall_factor"].to_numpy()[group_sample]
    sheet_density = hall_factor / (ELEMENTARY_CHARGE_C * np.abs(sheet_hall))
    relative_hall = sheet_hall_se / np.abs(sheet_hall)
    mobility = np.abs(sheet_hall) / sheet_resistance
    result = pd.DataFrame(
        {
            "sample": pd.Categorical.from_codes(group_sample, sheet["sample"]),
            "temperature_K": group_temperature,
            "field_T": field_group,
            "resistance_a_ohm": resistance_a,
            "resistance_b_ohm": resistance_b,
            "sheet_resistance_ohm_sq": sheet_resistance,
            "sheet_resistance_ohm_sq_unc": sheet_resistance_se,
            "resistivity_ohm_m": sheet_resistance * thickness,
            "sheet_hall_coefficient_m2_per_C": sheet_hall,
            "sheet_hall_coefficient_m2_per_C_unc": sheet_hall_se,
            "carrier_type": np.where(sheet_hall > 0.0, "p", "n"),
            "density_m3": sheet_density / thickness,
            "density_m3_unc": sheet_density / thickness * relative_hall,
            "hall_mobility_m2_per_Vs": mobility,
            "hall_mobility_m2_per_Vs_unc": mobility
            * np.hypot(relative_hall, sheet_resistance_se / sheet_resistance),
        }
    )
    return result


def main():
    if len(sys.argv) < 2:
        raise SystemExit(__doc__)
    directory = sys.argv[1]
    repetitions = int(sys.argv[2]) if len(sys.argv) > 2 else 5
    frame, sheet, meta = load(directory)
    result = reduce(frame, sheet)  # warm-up, untimed
    seconds = []
    for _ in range(max(repetitions, 1)):
        started = time.perf_counter()
        result = reduce(frame, sheet)
        seconds.append(time.perf_counter() - started)
    seconds.sort()
    checks = []
    for row in meta.get("check_rows", []):
        checks.append(
            {
                "row": row,
                "sample": str(result["sample"].iloc[row]),
                "temperature_K": float(result["temperature_K"].iloc[row]),
                "density_m3": float(result["density_m3"].iloc[row]),
                "hall_mobility_m2_per_Vs": float(result["hall_mobility_m2_per_Vs"].iloc[row]),
            }
        )
    print(
        json.dumps(
            {
                "median_s": seconds[len(seconds) // 2],
                "min_s": seconds[0],
                "repetitions": len(seconds),
                "rows": len(result),
                "numpy": np.__version__,
                "pandas": pd.__version__,
                "checks": checks,
            }
        )
    )


if __name__ == "__main__":
    main()
