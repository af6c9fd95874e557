/*
 * A hand-written C implementation of the reference law of specs/energy_longitudinal.yaml,
 * written for the instruction-count benchmark (bench/step_instructions.py) the way an
 * engineer would code it without lawsmith: energy errors as named variables, the same
 * envelope guards (clamp to the proved ranges, NaN to the midpoint or zero error, default
 * gains when the given ones leave their ranges), the same asin guard, and the same
 * saturation with limit bits. Not used by the product; invented demo airframe numbers.
 */
#include <math.h>
#include <stdbool.h>
#include <stdint.h>

typedef struct {
    double h, va, h_r, va_r, hdot_r, vadot_r, drag, alpha;
} hand_inputs;

typedef struct {
    double k_tot, k_bal, k_h, k_v;
} hand_gains;

typedef struct {
    double pitch_cmd, thrust_cmd;
    uint32_t limits;
    bool domain;
} hand_outputs;

#define MASS 7.5
#define G 9.80665

static double guard(double x, double lo, double hi, double nan_value, bool *domain)
{
    if (x >= lo && x <= hi) {
        return x;
    }
    *domain = true;
    if (isnan(x)) {
        return nan_value;
    }
    return x < lo ? lo : hi;
}

void hand_step(const hand_inputs *in, const hand_gains *gains, hand_outputs *out)
{
    bool domain = false;
    uint32_t limits = 0u;
    const double h_r = guard(in->h_r, 30.0, 600.0, 315.0, &domain);
    const double va_r = guard(in->va_r, 15.0, 30.0, 22.5, &domain);
    const double hdot_r = guard(in->hdot_r, -3.0, 3.0, 0.0, &domain);
    const double vadot_r = guard(in->vadot_r, -1.0, 1.0, 0.0, &domain);
    const double drag = guard(in->drag, 1.0, 25.0, 13.0, &domain);
    const double alpha = guard(in->alpha, -0.05, 0.2, 0.075, &domain);
    const double h = h_r + guard(in->h - h_r, -5.0, 5.0, 0.0, &domain);
    const double va = va_r + guard(in->va - va_r, -2.0, 2.0, 0.0, &domain);
    hand_gains k = *gains;
    if (!(k.k_tot >= 0.05 && k.k_tot <= 0.5 && k.k_bal >= 0.05 && k.k_bal <= 0.5 &&
          k.k_h >= 0.1 && k.k_h <= 1.0 && k.k_v >= 0.1 && k.k_v <= 1.0)) {
        domain = true;
        k.k_tot = 0.25;
        k.k_bal = 0.35;
        k.k_h = 0.3;
        k.k_v = 0.5;
    }

    /* energy errors and the reference energy rates */
    const double mg = MASS * G;
    const double e_pot = mg * (h_r - h);
    const double e_kin = 0.5 * MASS * (va_r * va_r - va * va);
    const double et = e_pot + e_kin;
    const double eb = e_pot - e_kin;
    const double et_dot_ref = mg * hdot_r + MASS * va_r * vadot_r;
    const double eb_dot_ref = mg * hdot_r - MASS * va_r * vadot_r;

    const double thrust = drag + (et_dot_ref + k.k_tot * et) / va;
    double u = (et_dot_ref + eb_dot_ref + k.k_tot * et + k.k_bal * eb) / (2.0 * mg * va);
    u = u < -1.0 ? -1.0 : (u > 1.0 ? 1.0 : u);
    double pitch = asin(u) + alpha;
    double thr = thrust;

    if (!isfinite(pitch)) {
        domain = true;
        pitch = 0.0;
    }
    if (pitch < -0.35) {
        pitch = -0.35;
        limits |= 1u;
    } else if (pitch > 0.45) {
        pitch = 0.45;
        limits |= 2u;
    }
    if (!isfinite(thr)) {
        domain = true;
        thr = 0.0;
    }
    if (thr < 0.0) {
        thr = 0.0;
        limits |= 4u;
    } else if (thr > 45.0) {
        thr = 45.0;
        limits |= 8u;
    }
    out->pitch_cmd = pitch;
    out->thrust_cmd = thr;
    out->limits = limits;
    out->domain = domain;
}
