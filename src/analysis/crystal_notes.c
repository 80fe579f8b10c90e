/* crystal_notes.c: what a run says about each crystal part once it oscillates: the
 * measured frequency as a deviation from the crystal's series resonance fs and from
 * its load-resonance frequency (ppm), the main motional arm's current and the drive
 * power it dissipates in the ESR, with a warning above the part's drive-limit.
 *
 * The arm's current is read from the run's last state: for a high-Q arm it is
 * sinusoidal, i = I cos(wt + phi), and the voltage on its motional capacitance
 * follows as vm = vm_dc + I/(w cm) sin(wt + phi) (vm_dc: the crystal's DC voltage,
 * that of the operating point), so I = sqrt(i^2 + (w cm (vm - vm_dc))^2) at any
 * instant; the drive power is esr I^2 / 2. */
#include "analysis/analysis_impl.h"

#include "ringup/format.h"

#include <math.h>
#include <stdio.h>

#define PI 3.14159265358979323846

void ru_crystal_notes(const ru_circuit *c, const ru_system *s, const double *x_op,
                      const double *x_end, ru_run_report *rep)
{
    double f = rep->meas.frequency_hz;
    if (!x_op || !x_end || !(f > 0))
        return;
    for (size_t i = 0; i < ru_circuit_part_count(c); i++) {
        const ru_part *p = ru_circuit_part(c, i);
        int k = ru_system_part_state(s, (int)i);
        double r, l, cm;
        if (p->type != RU_PART_CRYSTAL || p->crystal.no_main || k < 0 ||
            !ru_crystal_arm(p, 0, &r, &l, &cm))
            continue;
        double w = 2 * PI * f, dv = x_end[k + 1] - x_op[k + 1];
        double amp = sqrt(x_end[k] * x_end[k] + (w * cm * dv) * (w * cm * dv));
        double pw = r * amp * amp / 2, fl = ru_crystal_load_freq_hz(p);
        char ia[32], pa[32], lim[32], load[96] = "";
        ru_format_si(amp, "A", 4, ia, sizeof ia);
        ru_format_si(pw, "W", 4, pa, sizeof pa);
        if (fl > 0) {
            char cl[32];
            ru_format_si(p->crystal.load_f, "F", 3, cl, sizeof cl);
            snprintf(load, sizeof load, ", %+.2f ppm from its load frequency at %s",
                     (f / fl - 1) * 1e6, cl);
        }
        int over = p->crystal.drive_limit_w > 0 && pw > p->crystal.drive_limit_w;
        ru_format_si(p->crystal.drive_limit_w, "W", 3, lim, sizeof lim);
        ru_report_note(rep, "%scrystal %s: %+.2f ppm from fs%s; motional current %s peak, "
                            "drive power %s%s%s%s",
                       over ? "warning: " : "", p->name, (f / p->value - 1) * 1e6, load, ia,
                       pa, rep->meas.settled ? "" : " at the end of the run (not settled)",
                       over ? ", above its drive-limit " : "", over ? lim : "");
    }
}
