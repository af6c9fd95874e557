/*
 * A fixed-rate control task around the generated C of specs/energy_longitudinal.yaml, as
 * firmware would run it: a 50 Hz loop on a simulated clock that reads the measurements,
 * calls energy_longitudinal_compute_commands, sends the commands, then advances the
 * reference filters with energy_longitudinal_advance_references. In firmware the loop body runs in the timer task.
 *
 * The aircraft here is the spec's own point-mass model (h' = va sin(gamma),
 * va' = (T - D)/m - g sin(gamma)) with a perfect inner pitch loop (gamma = pitch - alpha),
 * so the example runs anywhere. Build (from the repository root):
 *
 *   cc -std=c99 -O2 -I generated/energy_longitudinal examples/fixed_rate_task.c \
 *      generated/energy_longitudinal/energy_longitudinal.c -lm -o fixed_rate_task
 *
 * and run `./fixed_rate_task 130 22 60` (altitude and airspeed commands, seconds). It prints
 * the time, altitude, airspeed, and the periods with a limit bit or the domain flag set.
 */
#include "energy_longitudinal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#define PERIOD 0.02 /* s: 50 Hz */
#define SUBSTEPS 20 /* the plant integrated finer than the task runs */
#define MASS 7.5 /* kg, the spec's parameter */
#define G 9.80665 /* m/s^2 */
#define DRAG 8.0 /* N, taken as known exactly here */
#define ALPHA 0.05 /* rad */

int main(int argc, char **argv)
{
    double h = 120.0, va = 22.0;
    energy_longitudinal_targets targets, start;
    energy_longitudinal_references references;
    energy_longitudinal_gains gains = energy_longitudinal_default_gains();
    long periods, k;
    long limited = 0, outside = 0;
    if (argc != 4) {
        fprintf(stderr, "usage: %s H_CMD VA_CMD SECONDS\n", argv[0]);
        return 2;
    }
    targets.h_cmd = atof(argv[1]);
    targets.va_cmd = atof(argv[2]);
    periods = lround(atof(argv[3]) / PERIOD);
    /* the filters start at rest at the aircraft's state, then follow the commands */
    start.h_cmd = h;
    start.va_cmd = va;
    energy_longitudinal_start_references(&references, &start);
    for (k = 0; k < periods; k++) {
        energy_longitudinal_reading in;
        energy_longitudinal_commands out;
        double gamma, dt = PERIOD / SUBSTEPS;
        int i;
        /* 1. read the sensors and the reference filters; 2. compute the commands */
        in.h = h;
        in.va = va;
        in.h_r = references.h_r;
        in.va_r = references.va_r;
        in.hdot_r = references.hdot_r;
        in.vadot_r = references.vadot_r;
        in.drag = DRAG;
        in.alpha = ALPHA;
        energy_longitudinal_compute_commands(&in, &gains, &out);
        limited += out.limits != 0u;
        outside += out.domain;
        /* 3. the actuators hold the commands over the period */
        gamma = out.pitch_cmd - ALPHA;
        for (i = 0; i < SUBSTEPS; i++) {
            double hdot = va * sin(gamma);
            double vadot = (out.thrust_cmd - DRAG) / MASS - G * sin(gamma);
            h += dt * hdot;
            va += dt * vadot;
        }
        /* 4. advance the references for the next period */
        energy_longitudinal_advance_references(&references, &targets, &gains, PERIOD);
    }
    printf("%.17g %.17g %.17g %ld %ld\n", (double)periods * PERIOD, h, va, limited, outside);
    return 0;
}
