#!/usr/bin/env python3
"""Greenhouse vent controller: an example external evaluator for Skerry.

The genome is four gains of a roof-vent controller. Each evaluation simulates
one day (24 h, one-minute steps) of a small greenhouse on a toy thermal model
and returns the discomfort the crop suffered plus a little actuator wear, to be
MINIMISED.

It speaks Skerry's external-evaluator protocol (docs/evaluator-protocol.md):
one JSON EvaluationRequest per line on stdin, one JSON EvaluationResponse per
line on stdout, diagnostics on stderr. Only the Python 3 standard library.

The model (a toy, not a design tool):

    C dT/dt = solar + heater - (UA + K u) (T - T_out)

  T      air temperature inside, deg C (starts at 18)
  T_out  outside: a daily sine, 6 K amplitude, warmest at 15:00, around a
         base temperature that the seed chooses in [10, 18] deg C
  solar  absorbed sunshine: 8.4 kW peak (20 m2 x 600 W/m2 x 0.7) on a sine
         from 06:00 to 20:00, times an hourly cloud factor in [0.3, 1]
  heater a fixed thermostat, 2 kW/K below 18.5 deg C, at most 6 kW
  C = 2.0e6 J/K, UA = 200 W/K (closed house), K = 2000 W/K (vents fully open)
  u      vent opening in [0, 1], chosen by the controller every minute:

    u = clamp(g0 + g1 (T - 23) / 5 + g2 (T_out - 23) / 10 + g3 sun, 0, 1)

  with sun the current irradiance as a fraction of the peak.

Score = mean over the day of (below 18 deg C)^2 + (above 27 deg C)^2, in K^2,
plus 0.05 x the total vent travel (sum of |u change|). A perfect controller
would score about 0; vents always shut cook the crop at noon (about 40 on a
typical day), vents always open chill it (about 10).

Requests: "seed" picks the day's weather; "case_name" may name a fixed
held-out day instead: "heatwave", "cold-snap" or "overcast". A seeded
held-out case ("seed-<n>", from the spec's validation.seeds) is a day of
seeded weather like any other.
"""

import json
import math
import random
import sys

GENOME_LENGTH = 4
STEP_S = 60.0
STEPS = 24 * 60
HEAT_CAPACITY = 2.0e6  # J/K
UA_CLOSED = 200.0  # W/K
VENT_CONDUCTANCE = 2000.0  # W/K at u = 1
SOLAR_PEAK_W = 20.0 * 600.0 * 0.7
HEATER_GAIN = 2000.0  # W/K below the heater setpoint
HEATER_MAX_W = 6000.0
HEATER_SETPOINT = 18.5
BAND_LOW, BAND_HIGH = 18.0, 27.0
WEAR_WEIGHT = 0.05

# Fixed held-out days: base outside temperature and hourly cloud factors.
CASES = {
    "heatwave": (24.0, [1.0] * 24),
    "cold-snap": (4.0, [0.9] * 24),
    "overcast": (15.0, [0.35] * 24),
}


def weather(seed, case_name):
    """Base outside temperature and 24 hourly cloud factors."""
    if case_name and not case_name.startswith("seed-"):
        if case_name not in CASES:
            raise ValueError(
                "unknown case_name %r (known: %s)"
                % (case_name, ", ".join(sorted(CASES))))
        return CASES[case_name]
    rng = random.Random(seed)
    base = rng.uniform(10.0, 18.0)
    clouds = [rng.uniform(0.3, 1.0) for _ in range(24)]
    return base, clouds


def simulate(genes, seed, case_name):
    """Returns (score, metrics) for one simulated day."""
    g0, g1, g2, g3 = genes
    base, clouds = weather(seed, case_name)
    t_in = 18.0
    u_prev = 0.0
    discomfort = 0.0
    travel = 0.0
    hottest, coldest = t_in, t_in
    minutes_out_of_band = 0
    for step in range(STEPS):
        hour = step * STEP_S / 3600.0
        t_out = base + 6.0 * math.sin(2.0 * math.pi * (hour - 9.0) / 24.0)
        daylight = max(0.0, math.sin(math.pi * (hour - 6.0) / 14.0)) \
            if 6.0 <= hour <= 20.0 else 0.0
        sun = daylight * clouds[int(hour) % 24]
        u = g0 + g1 * (t_in - 23.0) / 5.0 + g2 * (t_out - 23.0) / 10.0 + g3 * sun
        u = min(1.0, max(0.0, u))
        heater = min(HEATER_MAX_W, max(0.0, HEATER_GAIN * (HEATER_SETPOINT - t_in)))
        gain = SOLAR_PEAK_W * sun + heater
        loss = (UA_CLOSED + VENT_CONDUCTANCE * u) * (t_in - t_out)
        t_in += STEP_S * (gain - loss) / HEAT_CAPACITY
        low = max(0.0, BAND_LOW - t_in)
        high = max(0.0, t_in - BAND_HIGH)
        discomfort += low * low + high * high
        if low > 0.0 or high > 0.0:
            minutes_out_of_band += 1
        travel += abs(u - u_prev)
        u_prev = u
        hottest = max(hottest, t_in)
        coldest = min(coldest, t_in)
    score = discomfort / STEPS + WEAR_WEIGHT * travel
    metrics = {
        "hours_out_of_band": minutes_out_of_band / 60.0,
        "max_temp_c": hottest,
        "min_temp_c": coldest,
        "vent_travel": travel,
    }
    return score, metrics


def answer(request):
    """One EvaluationResponse (a dict) for one EvaluationRequest (a dict)."""
    # 64-bit integers arrive as JSON strings (protobuf's JSON mapping); echo
    # the id back exactly as it came.
    response = {"id": request.get("id", "0")}
    try:
        genes = [float(g) for g in request.get("genes", [])]
        if len(genes) != GENOME_LENGTH:
            raise ValueError("expected %d genes, got %d"
                             % (GENOME_LENGTH, len(genes)))
        if not all(math.isfinite(g) for g in genes):
            raise ValueError("genes must be finite")
        seed = int(request.get("seed", 0))
        score, metrics = simulate(genes, seed, request.get("case_name", ""))
        response["score"] = score
        response["metrics"] = metrics
    except (ValueError, TypeError) as e:
        response["error"] = str(e)
    return response


def main():
    print("greenhouse_vents: ready", file=sys.stderr, flush=True)
    for line in sys.stdin:
        line = line.strip()
        if not line:
            continue
        try:
            request = json.loads(line)
        except ValueError as e:
            print("greenhouse_vents: unreadable request: %s" % e,
                  file=sys.stderr, flush=True)
            request = {}
            response = {"id": "0", "error": "request is not JSON: %s" % e}
        else:
            response = answer(request)
        sys.stdout.write(json.dumps(response) + "\n")
        sys.stdout.flush()


if __name__ == "__main__":
    main()
