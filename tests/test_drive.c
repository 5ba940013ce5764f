/* DRIVE box: inverse and forward kinematics of the four drive kinds.
 * Each check names its source beside it.
 * SPDX-License-Identifier: MIT */
#include <criterion/criterion.h>
#include <math.h>
#include <stdint.h>
#include <string.h>
#include "internal.h"
#include "diag_text.h"
#include "rng.h"

#define PI VEER_PI
#define SENTINEL 12345.0
#define DNAN ((double)NAN)      /* NAN and INFINITY are float constants */
#define DINF ((double)INFINITY)

#define NEAR(a, b, tol)                                                                                      \
    do {                                                                                                     \
        double a_ = (a), b_ = (b);                                                                           \
        cr_assert(fabs(a_ - b_) <= (tol), "%s = %.12g, expected %.12g (tol %g)", #a, a_, b_, (double)(tol)); \
    } while (0)

static rng gen = {0x5eed5eedULL}; /* fixed-seed generator for the property tests (rng.h: splitmix64) */

static void fill(double *v, int n, double value) {
    for (int i = 0; i < n; i++) v[i] = value;
}
static void expect_untouched(const double *v, int n) {
    for (int i = 0; i < n; i++) cr_assert(v[i] == SENTINEL, "output %d was written on failure: %g", i, v[i]);
}

static veer_drive_def capstone_mecanum(void) {
    /* Lynch & Park, Modern Robotics, 13.2 / capstone: r = 0.0475, l = 0.235, w = 0.15 m. */
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_MECANUM);
    d.wheel_radius = 0.0475;
    d.half_wheelbase = 0.235;
    d.half_track = 0.15;
    return d;
}

/* ---- defaults and module counts ---------------------------------------- */

Test(drive, defaults_pass_their_check) {
    /* Values as documented in drive.h. */
    const veer_drive_kind kinds[4] = {VEER_DRIVE_STEERED, VEER_DRIVE_MECANUM, VEER_DRIVE_OMNI,
                                      VEER_DRIVE_DIFFERENTIAL};
    const int counts[4] = {4, 4, 3, 2};
    for (int k = 0; k < 4; k++) {
        veer_drive_def d = veer_default_drive_def(kinds[k]);
        veer_diag diag;
        memset(&diag, 0x55, sizeof diag); /* stale contents must be reset */
        cr_assert_eq(veer_drive_check(&d, &diag), VEER_OK, "kind %d: %s", (int)kinds[k], diag.message);
        cr_assert(diag.leg == -1 && diag.limit.kind == VEER_LIMIT_NONE);
        cr_assert_eq(diag.status, VEER_OK);
        cr_assert_str_empty(diag.message);
        cr_assert_eq(veer_drive_module_count(&d), counts[k]);
        NEAR(d.wheel_radius, 0.1, 0.0);
        NEAR(d.roller_angle, PI / 4.0, 0.0);
        NEAR(d.skid_factor, 1.0, 0.0);
    }
    veer_drive_def m = veer_default_drive_def(VEER_DRIVE_MECANUM);
    NEAR(m.half_wheelbase, 0.3, 0.0);
    NEAR(m.half_track, 0.25, 0.0);
    veer_drive_def df = veer_default_drive_def(VEER_DRIVE_DIFFERENTIAL);
    NEAR(df.track_width, 0.5, 0.0);
    veer_drive_def o = veer_default_drive_def(VEER_DRIVE_OMNI);
    for (int i = 0; i < 3; i++) {
        NEAR(hypot(o.modules[i].x, o.modules[i].y), 0.3, 1e-15);
        /* pushing tangentially: push direction perpendicular to the radius */
        NEAR(o.modules[i].x * cos(o.modules[i].drive_angle) + o.modules[i].y * sin(o.modules[i].drive_angle), 0.0,
             1e-15);
    }
    veer_drive_def s = veer_default_drive_def(VEER_DRIVE_STEERED);
    for (int i = 0; i < 4; i++) {
        NEAR(fabs(s.modules[i].x), 0.3, 0.0);
        NEAR(fabs(s.modules[i].y), 0.3, 0.0);
    }
    /* switching kind after the defaults is harmless */
    s.kind = VEER_DRIVE_MECANUM;
    cr_assert_eq(veer_drive_check(&s, NULL), VEER_OK);
    veer_drive_def u = veer_default_drive_def((veer_drive_kind)77);
    cr_assert_eq((int)u.kind, 77);
    cr_assert_eq(u.module_count, 0);
    cr_assert_eq(veer_drive_module_count(&u), 0);
    cr_assert_eq(veer_drive_module_count(NULL), 0);
}

Test(drive, wheel_matrix_rows_and_steered_zero) {
    double J[VEER_MAX_MODULES][3];
    veer_drive_def s = veer_default_drive_def(VEER_DRIVE_STEERED);
    cr_assert_eq(veer__drive_wheel_matrix(&s, J), 0);
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_DIFFERENTIAL);
    cr_assert_eq(veer__drive_wheel_matrix(&d, J), 2);
    veer_drive_def o = veer_default_drive_def(VEER_DRIVE_OMNI);
    cr_assert_eq(veer__drive_wheel_matrix(&o, J), 3);
    o.module_count = 9; /* out of range: no rows, no overflow */
    cr_assert_eq(veer__drive_wheel_matrix(&o, J), 0);
    cr_assert_eq(veer__drive_wheel_matrix(NULL, J), 0);
}

/* ---- steered ------------------------------------------------------------ */

Test(drive, steered_setpoints_rigid_body) {
    /* Rigid-body kinematics v_i = v + w x r_i: twist (1, 0, 1), module at
     * (0.3, 0.3): v_i = (0.7, 0.3), steer atan2(0.3, 0.7) = 0.404892 rad,
     * speed sqrt(0.58) = 0.761577 m/s (computed from that formula). */
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    cr_assert_eq(d.modules[0].x, 0.3);
    cr_assert_eq(d.modules[0].y, 0.3);
    const double tw[3] = {1.0, 0.0, 1.0};
    double steer[4], rate[4];
    cr_assert_eq(veer_drive_inverse(&d, tw, NULL, steer, rate), VEER_OK);
    NEAR(steer[0], 0.404892, 1e-6);
    NEAR(rate[0], 0.761577 / 0.1, 1e-5);
    for (int i = 1; i < 4; i++) { /* the same formula, module by module */
        double ux = tw[0] - tw[2] * d.modules[i].y, uy = tw[1] + tw[2] * d.modules[i].x;
        NEAR(steer[i], atan2(uy, ux), 1e-12);
        NEAR(rate[i], hypot(ux, uy) / d.wheel_radius, 1e-12);
    }
}

Test(drive, steered_no_prev_forward_wheel_and_range) {
    /* Documented convention (drive.h): forward wheel, steer in (-pi, pi],
     * standing module 0. Straight backwards gives +pi, never -pi. */
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    double steer[4], rate[4];
    const double back[3] = {-1.0, -0.0, 0.0};
    cr_assert_eq(veer_drive_inverse(&d, back, NULL, steer, rate), VEER_OK);
    for (int i = 0; i < 4; i++) {
        cr_assert(steer[i] == PI, "module %d steer %.17g", i, steer[i]);
        NEAR(rate[i], 10.0, 1e-12);
    }
    const double still[3] = {0.0, 0.0, 0.0};
    cr_assert_eq(veer_drive_inverse(&d, still, NULL, steer, rate), VEER_OK);
    for (int i = 0; i < 4; i++) {
        cr_assert(steer[i] == 0.0 && rate[i] == 0.0);
    }
    /* random twists: steer always in (-pi, pi], rate >= 0 */
    for (int k = 0; k < 500; k++) {
        const double tw[3] = {uni(&gen, -2, 2), uni(&gen, -2, 2), uni(&gen, -3, 3)};
        cr_assert_eq(veer_drive_inverse(&d, tw, NULL, steer, rate), VEER_OK);
        for (int i = 0; i < 4; i++) cr_assert(steer[i] > -PI && steer[i] <= PI && rate[i] >= 0.0);
    }
}

Test(drive, steered_reversal_and_branches) {
    /* Reverse choice (design.md): the direction is taken modulo pi, nearest to
     * prev_steer, reversing the wheel; no wrapping. Base values from the
     * rigid-body formula above: phi = atan2(0.3, 0.7), speed sqrt(0.58). */
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    const double tw[3] = {1.0, 0.0, 1.0};
    const double phi = atan2(0.3, 0.7), rate0 = sqrt(0.58) / 0.1;
    double prev[4], steer[4], rate[4];

    fill(prev, 4, 0.0);
    prev[0] = PI + phi - 0.1; /* near the reversed representative */
    cr_assert_eq(veer_drive_inverse(&d, tw, prev, steer, rate), VEER_OK);
    NEAR(steer[0], PI + phi, 1e-12);
    NEAR(rate[0], -rate0, 1e-12);

    prev[0] = -PI + phi + 0.2; /* the other reversed representative */
    cr_assert_eq(veer_drive_inverse(&d, tw, prev, steer, rate), VEER_OK);
    NEAR(steer[0], -PI + phi, 1e-12);
    NEAR(rate[0], -rate0, 1e-12);

    prev[0] = 2.0 * PI + 0.1; /* far outside (-pi, pi]: stays on its branch */
    cr_assert_eq(veer_drive_inverse(&d, tw, prev, steer, rate), VEER_OK);
    NEAR(steer[0], 2.0 * PI + phi, 1e-12);
    NEAR(rate[0], rate0, 1e-12);

    prev[0] = 7.0; /* 2 pi + phi = 6.688 is nearer than 3 pi + phi = 9.83 */
    cr_assert_eq(veer_drive_inverse(&d, tw, prev, steer, rate), VEER_OK);
    NEAR(steer[0], 2.0 * PI + phi, 1e-12);
    NEAR(rate[0], rate0, 1e-12);

    prev[0] = -3.0 * PI + phi + 0.3; /* odd multiple of pi below: reversed */
    cr_assert_eq(veer_drive_inverse(&d, tw, prev, steer, rate), VEER_OK);
    NEAR(steer[0], -3.0 * PI + phi, 1e-11);
    NEAR(rate[0], -rate0, 1e-12);

    /* a standing module keeps prev_steer exactly, rate 0 */
    const double still[3] = {0.0, 0.0, 0.0};
    const double p2[4] = {7.0, -4.0, 0.25, 100.0};
    cr_assert_eq(veer_drive_inverse(&d, still, p2, steer, rate), VEER_OK);
    for (int i = 0; i < 4; i++) cr_assert(steer[i] == p2[i] && rate[i] == 0.0);

    /* random prev: always within pi/2 of prev, and the wheel's tread velocity
     * rate * r * (cos, sin)(steer) is the rigid-body module velocity */
    for (int k = 0; k < 500; k++) {
        const double t[3] = {uni(&gen, -2, 2), uni(&gen, -2, 2), uni(&gen, -3, 3)};
        for (int i = 0; i < 4; i++) prev[i] = uni(&gen, -20, 20);
        cr_assert_eq(veer_drive_inverse(&d, t, prev, steer, rate), VEER_OK);
        for (int i = 0; i < 4; i++) {
            cr_assert(fabs(steer[i] - prev[i]) <= PI / 2.0 + 1e-12);
            NEAR(rate[i] * 0.1 * cos(steer[i]), t[0] - t[2] * d.modules[i].y, 1e-12);
            NEAR(rate[i] * 0.1 * sin(steer[i]), t[1] + t[2] * d.modules[i].x, 1e-12);
        }
    }
}

Test(drive, steered_prev_steer_may_alias_steer) {
    /* API promise: steer may be the same array as prev_steer. */
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    const double tw[3] = {1.0, 0.0, 1.0};
    double s[4] = {PI + 0.3, 0.0, 0.0, 0.0}, rate[4];
    cr_assert_eq(veer_drive_inverse(&d, tw, s, s, rate), VEER_OK);
    NEAR(s[0], PI + atan2(0.3, 0.7), 1e-12);
    cr_assert(rate[0] < 0.0);
}

static void expect_perpendicular_to_centre(const veer_drive_def *d, const double tw[3], double cx, double cy) {
    /* Rigid-body fact: in a rotation about c every point moves perpendicular
     * to the line from c to it, at speed |w| |r - c|. */
    double steer[VEER_MAX_MODULES], rate[VEER_MAX_MODULES];
    cr_assert_eq(veer_drive_inverse(d, tw, NULL, steer, rate), VEER_OK);
    for (int i = 0; i < d->module_count; i++) {
        const double rx = d->modules[i].x - cx, ry = d->modules[i].y - cy, dist = hypot(rx, ry);
        NEAR((cos(steer[i]) * rx + sin(steer[i]) * ry) / dist, 0.0, 1e-12);
        NEAR(rate[i] * d->wheel_radius, fabs(tw[2]) * dist, 1e-12);
    }
}

Test(drive, steered_spin_and_pivot_perpendicular) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    const double spin[3] = {0.0, 0.0, 1.3};
    expect_perpendicular_to_centre(&d, spin, 0.0, 0.0);
    d.module_count = 6;
    for (int k = 0; k < 50; k++) {
        for (int i = 0; i < 6; i++) {
            d.modules[i].x = uni(&gen, -1, 1);
            d.modules[i].y = uni(&gen, -1, 1);
        }
        if (veer_drive_check(&d, NULL) != VEER_OK) continue;
        const double w = uni(&gen, -2, 2), cx = uni(&gen, -3, 3), cy = uni(&gen, -3, 3);
        /* rotation about body point c: v = -w x c = (w c_y, -w c_x) */
        const double tw[3] = {w * cy, -w * cx, w};
        expect_perpendicular_to_centre(&d, tw, cx, cy);
        expect_perpendicular_to_centre(&d, spin, 0.0, 0.0);
    }
}

/* ---- mecanum -------------------------------------------------------------- */

Test(drive, mecanum_matrix_is_books_H0) {
    /* Lynch & Park, Modern Robotics, 13.2: H(0) = (1/r)[[-l-w, 1, -1],
     * [l+w, 1, 1], [l+w, 1, -1], [-l-w, 1, 1]] on (wz, vx, vy). */
    veer_drive_def d = capstone_mecanum();
    const double r = 0.0475, lw = 0.235 + 0.15;
    const double H[4][3] = {{-lw, 1, -1}, {lw, 1, 1}, {lw, 1, -1}, {-lw, 1, 1}};
    double J[VEER_MAX_MODULES][3];
    cr_assert_eq(veer__drive_wheel_matrix(&d, J), 4);
    for (int i = 0; i < 4; i++) {
        NEAR(J[i][0], H[i][1] / r, 1e-12); /* vx column */
        NEAR(J[i][1], H[i][2] / r, 1e-12); /* vy column */
        NEAR(J[i][2], H[i][0] / r, 1e-12); /* wz column */
    }
}

Test(drive, mecanum_capstone_motions) {
    /* Lynch & Park, Modern Robotics, 13.2, capstone geometry: wheel rates for
     * 1 s, constant twist (exact for pure translation or pure rotation). */
    veer_drive_def d = capstone_mecanum();
    double tw[3];
    const double fwd[4] = {10, 10, 10, 10};
    cr_assert_eq(veer_drive_forward(&d, NULL, fwd, tw), VEER_OK);
    NEAR(tw[0] * 1.0, 0.475, 1e-12); /* 0.475 m forward */
    NEAR(tw[1], 0.0, 1e-12);
    NEAR(tw[2], 0.0, 1e-12);
    const double side[4] = {-10, 10, -10, 10};
    cr_assert_eq(veer_drive_forward(&d, NULL, side, tw), VEER_OK);
    NEAR(tw[0], 0.0, 1e-12);
    NEAR(tw[1] * 1.0, 0.475, 1e-12); /* 0.475 m to the left (+y) */
    NEAR(tw[2], 0.0, 1e-12);
    const double turn[4] = {-10, 10, 10, -10};
    cr_assert_eq(veer_drive_forward(&d, NULL, turn, tw), VEER_OK);
    NEAR(tw[0], 0.0, 1e-12);
    NEAR(tw[1], 0.0, 1e-12);
    NEAR(tw[2] * 1.0, 1.2338, 1e-4); /* 10 r / (l + w) = 1.2338 rad */
    /* and back: the inverse gives the book's wheel rates, fixed steer 0 */
    const double t_turn[3] = {0.0, 0.0, 10.0 * 0.0475 / 0.385};
    double steer[4], rate[4];
    cr_assert_eq(veer_drive_inverse(&d, t_turn, NULL, steer, rate), VEER_OK);
    for (int i = 0; i < 4; i++) {
        NEAR(rate[i], turn[i], 1e-12);
        cr_assert(steer[i] == 0.0);
    }
}

Test(drive, mecanum_diagonal_drives_two_wheels) {
    /* Common practice with no source: with 45-degree rollers a pure diagonal
     * translation (vx = vy) drives only two of the four wheels. */
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_MECANUM);
    const double tw[3] = {0.7, 0.7, 0.0};
    double steer[4], rate[4];
    cr_assert_eq(veer_drive_inverse(&d, tw, NULL, steer, rate), VEER_OK);
    int zero = 0, driven = 0;
    for (int i = 0; i < 4; i++) {
        if (fabs(rate[i]) < 1e-12) zero++;
        if (fabs(rate[i]) > 1.0) driven++;
    }
    cr_assert_eq(zero, 2, "zero-rate wheels: %d", zero);
    cr_assert_eq(driven, 2);
    /* which ones: front-left and rear-right rest (wheels 0 and 2) */
    NEAR(rate[0], 0.0, 1e-12);
    NEAR(rate[2], 0.0, 1e-12);
}

Test(drive, mecanum_least_squares_matches_numpy) {
    /* Inconsistent wheel rates (3, 8, -2, 5) on the capstone geometry:
     * reference numpy.linalg.lstsq (Debian python3-numpy 1.24) on the book's
     * H(0), giving (vx, vy, wz) = (0.16625, 0.1425, -0.0616883116883117). */
    veer_drive_def d = capstone_mecanum();
    const double u[4] = {3, 8, -2, 5};
    double tw[3];
    cr_assert_eq(veer_drive_forward(&d, NULL, u, tw), VEER_OK);
    NEAR(tw[0], 0.16624999999999998, 1e-12);
    NEAR(tw[1], 0.14250000000000002, 1e-12);
    NEAR(tw[2], -0.0616883116883117, 1e-12);
}

/* ---- omni --------------------------------------------------------------- */

Test(drive, omni_rate_is_push_component_of_module_velocity) {
    /* Rigid-body kinematics: an omni wheel turns with the component of its
     * contact-point velocity v + w x r_i along its push direction (Lynch &
     * Park, Modern Robotics, 13.2, rollers at gamma = 0). */
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_OMNI);
    d.module_count = 5;
    for (int i = 0; i < 5; i++) {
        d.modules[i].x = uni(&gen, -0.5, 0.5);
        d.modules[i].y = uni(&gen, -0.5, 0.5);
        d.modules[i].drive_angle = uni(&gen, -PI, PI);
    }
    cr_assert_eq(veer_drive_check(&d, NULL), VEER_OK);
    for (int k = 0; k < 100; k++) {
        const double tw[3] = {uni(&gen, -2, 2), uni(&gen, -2, 2), uni(&gen, -3, 3)};
        double steer[5], rate[5];
        cr_assert_eq(veer_drive_inverse(&d, tw, NULL, steer, rate), VEER_OK);
        for (int i = 0; i < 5; i++) {
            const double ux = tw[0] - tw[2] * d.modules[i].y, uy = tw[1] + tw[2] * d.modules[i].x;
            const double b = d.modules[i].drive_angle;
            NEAR(rate[i], (ux * cos(b) + uy * sin(b)) / d.wheel_radius, 1e-12);
            cr_assert(steer[i] == b); /* fixed direction reported */
        }
    }
}

Test(drive, omni_least_squares_matches_numpy) {
    /* Four tangential wheels on a 0.3 m circle, r = 0.05, inconsistent rates
     * (5, 7, -3, 2): reference numpy.linalg.lstsq (Debian python3-numpy 1.24)
     * gives (-0.125, 0.2, 0.458333333333333). */
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_OMNI);
    d.module_count = 4;
    d.wheel_radius = 0.05;
    const double pos[4][2] = {{0.3, 0}, {0, 0.3}, {-0.3, 0}, {0, -0.3}};
    const double ang[4] = {PI / 2, PI, 1.5 * PI, 0};
    for (int i = 0; i < 4; i++) {
        d.modules[i].x = pos[i][0];
        d.modules[i].y = pos[i][1];
        d.modules[i].drive_angle = ang[i];
    }
    const double u[4] = {5, 7, -3, 2};
    double tw[3];
    cr_assert_eq(veer_drive_forward(&d, NULL, u, tw), VEER_OK);
    NEAR(tw[0], -0.12499999999999996, 1e-12);
    NEAR(tw[1], 0.2, 1e-12);
    NEAR(tw[2], 0.45833333333333337, 1e-12);
}

/* ---- differential ------------------------------------------------------- */

Test(drive, differential_siegwart) {
    /* Siegwart & Nourbakhsh, Introduction to Autonomous Mobile Robots, ch. 3:
     * vx = r (u_l + u_r) / 2, wz = r (u_r - u_l) / (2 b). r = 1, b = 1,
     * left 2, right 4 rad/s: 3 m/s, 1 rad/s (computed from the model). */
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_DIFFERENTIAL);
    d.wheel_radius = 1.0;
    d.track_width = 2.0;
    const double u[2] = {2.0, 4.0};
    double tw[3];
    cr_assert_eq(veer_drive_forward(&d, NULL, u, tw), VEER_OK);
    NEAR(tw[0], 3.0, 1e-12);
    NEAR(tw[1], 0.0, 0.0);
    NEAR(tw[2], 1.0, 1e-12);
    /* ICR-based skid-steer model: skid factor 1.5 widens the effective track */
    d.skid_factor = 1.5;
    cr_assert_eq(veer_drive_forward(&d, NULL, u, tw), VEER_OK);
    NEAR(tw[0], 3.0, 1e-12);
    NEAR(tw[2], 1.0 / 1.5, 1e-12);
    /* inverse: same model, vy is ignored (it cannot be produced) */
    const double t2[3] = {3.0, 5.0, 1.0 / 1.5};
    double steer[2], rate[2];
    cr_assert_eq(veer_drive_inverse(&d, t2, NULL, steer, rate), VEER_OK);
    NEAR(rate[0], 2.0, 1e-12);
    NEAR(rate[1], 4.0, 1e-12);
    cr_assert(steer[0] == 0.0 && steer[1] == 0.0);
}

/* ---- round trips over every kind ---------------------------------------- */

static void expect_round_trip(const veer_drive_def *d, const double tw[3], const double *prev) {
    double steer[VEER_MAX_MODULES], rate[VEER_MAX_MODULES], back[3];
    cr_assert_eq(veer_drive_inverse(d, tw, prev, steer, rate), VEER_OK);
    cr_assert_eq(veer_drive_forward(d, steer, rate, back), VEER_OK);
    for (int j = 0; j < 3; j++) NEAR(back[j], tw[j], 1e-9);
}

Test(drive, forward_inverts_inverse_all_kinds) {
    /* Property: forward(inverse(twist)) == twist for consistent wheel rates
     * (exact kinematics, least squares with zero residual). Random twists and
     * layouts from a fixed-seed generator. */
    int omni_layouts = 0;
    for (int lay = 0; lay < 40; lay++) {
        veer_drive_def s = veer_default_drive_def(VEER_DRIVE_STEERED);
        s.module_count = 2 + lay % 7;
        s.wheel_radius = uni(&gen, 0.03, 0.3);
        for (int i = 0; i < s.module_count; i++) {
            s.modules[i].x = uni(&gen, -1, 1);
            s.modules[i].y = uni(&gen, -1, 1);
        }
        veer_drive_def m = veer_default_drive_def(VEER_DRIVE_MECANUM);
        m.wheel_radius = uni(&gen, 0.03, 0.3);
        m.half_wheelbase = uni(&gen, 0.1, 0.8);
        m.half_track = uni(&gen, 0.1, 0.8);
        m.roller_angle = uni(&gen, 0.2, 1.3);
        veer_drive_def o = veer_default_drive_def(VEER_DRIVE_OMNI);
        o.module_count = 3 + lay % 6;
        o.wheel_radius = uni(&gen, 0.03, 0.3);
        for (int i = 0; i < o.module_count; i++) {
            o.modules[i].x = uni(&gen, -1, 1);
            o.modules[i].y = uni(&gen, -1, 1);
            o.modules[i].drive_angle = uni(&gen, -PI, PI);
        }
        veer_drive_def df = veer_default_drive_def(VEER_DRIVE_DIFFERENTIAL);
        df.wheel_radius = uni(&gen, 0.03, 0.3);
        df.track_width = uni(&gen, 0.2, 1.5);
        df.skid_factor = uni(&gen, 1.0, 2.0);
        cr_assert_eq(veer_drive_check(&s, NULL), VEER_OK);
        cr_assert_eq(veer_drive_check(&m, NULL), VEER_OK);
        cr_assert_eq(veer_drive_check(&df, NULL), VEER_OK);
        const int omni_ok = veer_drive_check(&o, NULL) == VEER_OK;
        omni_layouts += omni_ok;
        for (int k = 0; k < 25; k++) {
            const double tw[3] = {uni(&gen, -2, 2), uni(&gen, -2, 2), uni(&gen, -3, 3)};
            double prev[VEER_MAX_MODULES];
            for (int i = 0; i < VEER_MAX_MODULES; i++) prev[i] = uni(&gen, -10, 10);
            expect_round_trip(&s, tw, NULL);
            expect_round_trip(&s, tw, prev);
            expect_round_trip(&m, tw, NULL);
            if (omni_ok) expect_round_trip(&o, tw, NULL);
            const double flat[3] = {tw[0], 0.0, tw[2]};
            expect_round_trip(&df, flat, NULL);
        }
    }
    cr_assert(omni_layouts >= 35, "only %d of 40 random omni layouts accepted", omni_layouts);
}

Test(drive, steered_least_squares_matches_numpy) {
    /* Three modules measuring an inconsistent motion: reference
     * numpy.linalg.lstsq (Debian python3-numpy 1.24) on the 6x3 system. */
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    d.module_count = 3;
    d.wheel_radius = 0.08;
    const double pos[3][2] = {{0.4, 0.3}, {-0.4, 0.3}, {0.0, -0.35}};
    for (int i = 0; i < 3; i++) {
        d.modules[i].x = pos[i][0];
        d.modules[i].y = pos[i][1];
    }
    const double steer[3] = {0.3, 1.2, -0.5}, rate[3] = {10, 12, 9};
    double tw[3];
    cr_assert_eq(veer_drive_forward(&d, steer, rate, tw), VEER_OK);
    NEAR(tw[0], 0.5494064752954941, 1e-12);
    NEAR(tw[1], 0.2619957666875276, 1e-12);
    NEAR(tw[2], -0.38309061709070885, 1e-12);
}

Test(drive, solve3_cholesky) {
    /* Linear algebra: N = [[4,2,0],[2,5,1],[0,1,3]] is symmetric positive
     * definite (leading minors 4, 16, 44); b = N (1, -2, 3) = (0, -5, 7). */
    const double N[3][3] = {{4, 2, 0}, {2, 5, 1}, {0, 1, 3}}, b[3] = {0, -5, 7};
    double x[3];
    cr_assert_eq(veer__drive_solve3(N, b, x), 0);
    NEAR(x[0], 1.0, 1e-14);
    NEAR(x[1], -2.0, 1e-14);
    NEAR(x[2], 3.0, 1e-14);
    /* singular (third row = first + second) and indefinite: refused, x untouched */
    const double S[3][3] = {{1, 2, 3}, {2, 5, 7}, {3, 7, 10}}, I[3][3] = {{1, 0, 0}, {0, -1, 0}, {0, 0, 1}};
    const double Z[3][3] = {{1, 0, 0}, {0, 0, 0}, {0, 0, 1}}, Q[3][3] = {{1, 0, 0}, {0, DNAN, 0}, {0, 0, 1}};
    fill(x, 3, SENTINEL);
    cr_assert_eq(veer__drive_solve3(S, b, x), -1);
    cr_assert_eq(veer__drive_solve3(I, b, x), -1);
    cr_assert_eq(veer__drive_solve3(Z, b, x), -1);
    cr_assert_eq(veer__drive_solve3(Q, b, x), -1);
    expect_untouched(x, 3);
}

/* ---- bad input ---------------------------------------------------------- */

static void expect_check_fails(const veer_drive_def *d, veer_status want, const char *needle) {
    veer_diag diag;
    const veer_status got = veer_drive_check(d, &diag);
    cr_assert_eq(got, want, "status %s, expected %s (%s)", veer_status_name(got), veer_status_name(want),
                 diag.message);
    cr_assert_eq(diag.status, want);
    cr_assert(diag.message[0] != '\0', "empty message");
    cr_assert(diag.leg == -1 && diag.waypoint == -1 && diag.grid_index == -1 && diag.s == -1.0);
    cr_assert(diag.limit.kind == VEER_LIMIT_NONE && diag.limit.module == -1);
    if (needle) cr_assert(diag_says(&diag, needle), "\"%s\" lacks \"%s\"", diag.message, needle);
    /* the kinematics refuse the same drive and write nothing */
    double steer[VEER_MAX_MODULES], rate[VEER_MAX_MODULES], tw[3];
    fill(steer, VEER_MAX_MODULES, SENTINEL);
    fill(rate, VEER_MAX_MODULES, SENTINEL);
    fill(tw, 3, SENTINEL);
    const double t[3] = {0.5, 0.1, 0.2}, u[VEER_MAX_MODULES] = {1, 2, 3, 4, 5, 6, 7, 8};
    const double st[VEER_MAX_MODULES] = {0};
    cr_assert_eq(veer_drive_inverse(d, t, NULL, steer, rate), want);
    cr_assert_eq(veer_drive_forward(d, st, u, tw), want);
    expect_untouched(steer, VEER_MAX_MODULES);
    expect_untouched(rate, VEER_MAX_MODULES);
    expect_untouched(tw, 3);
}

Test(drive, check_refuses_bad_drives) {
    /* Input rules of drive.h: named status, message, nothing written. */
    veer_diag diag;
    cr_assert_eq(veer_drive_check(NULL, &diag), VEER_ERR_NULL);
    cr_assert(diag.message[0] != '\0');
    cr_assert_eq(veer_drive_check(NULL, NULL), VEER_ERR_NULL);

    veer_drive_def d = veer_default_drive_def((veer_drive_kind)0);
    expect_check_fails(&d, VEER_ERR_VALUE, "kind");
    d = veer_default_drive_def((veer_drive_kind)9);
    expect_check_fails(&d, VEER_ERR_VALUE, "kind");

    const veer_drive_kind kinds[4] = {VEER_DRIVE_STEERED, VEER_DRIVE_MECANUM, VEER_DRIVE_OMNI,
                                      VEER_DRIVE_DIFFERENTIAL};
    for (int k = 0; k < 4; k++) {
        d = veer_default_drive_def(kinds[k]);
        d.wheel_radius = -0.1;
        expect_check_fails(&d, VEER_ERR_VALUE, "-0.1");
        d.wheel_radius = 0.0;
        expect_check_fails(&d, VEER_ERR_VALUE, "radius");
        d.wheel_radius = DNAN;
        expect_check_fails(&d, VEER_ERR_VALUE, "radius");
        d.wheel_radius = DINF;
        expect_check_fails(&d, VEER_ERR_VALUE, "radius");
    }

    d = veer_default_drive_def(VEER_DRIVE_STEERED);
    d.module_count = 1;
    expect_check_fails(&d, VEER_ERR_CAPACITY, "1");
    d.module_count = 9;
    expect_check_fails(&d, VEER_ERR_CAPACITY, "9");
    d.module_count = -3;
    expect_check_fails(&d, VEER_ERR_CAPACITY, NULL);
    d = veer_default_drive_def(VEER_DRIVE_OMNI);
    d.module_count = 2;
    expect_check_fails(&d, VEER_ERR_CAPACITY, NULL);
    d.module_count = 9;
    expect_check_fails(&d, VEER_ERR_CAPACITY, NULL);
    d = veer_default_drive_def(VEER_DRIVE_MECANUM);
    d.module_count = 3;
    expect_check_fails(&d, VEER_ERR_VALUE, "module_count 3");
    d = veer_default_drive_def(VEER_DRIVE_DIFFERENTIAL);
    d.module_count = 4;
    expect_check_fails(&d, VEER_ERR_VALUE, "module_count 4");

    d = veer_default_drive_def(VEER_DRIVE_STEERED);
    d.modules[2].y = DNAN;
    expect_check_fails(&d, VEER_ERR_VALUE, "module 2");
    d = veer_default_drive_def(VEER_DRIVE_STEERED);
    d.modules[3] = d.modules[1];
    expect_check_fails(&d, VEER_ERR_GEOMETRY, "modules 1 and 3");
    d = veer_default_drive_def(VEER_DRIVE_STEERED);
    for (int i = 0; i < 4; i++) d.modules[i].x = d.modules[i].y = 0.2;
    expect_check_fails(&d, VEER_ERR_GEOMETRY, "modules 0 and 1");

    d = veer_default_drive_def(VEER_DRIVE_MECANUM);
    d.half_wheelbase = 0.0;
    expect_check_fails(&d, VEER_ERR_VALUE, "wheelbase");
    d = veer_default_drive_def(VEER_DRIVE_MECANUM);
    d.half_track = DNAN;
    expect_check_fails(&d, VEER_ERR_VALUE, "track");
    const double bad_roller[4] = {0.0, PI / 2, 0.5 * PI / 180.0, DNAN};
    for (int k = 0; k < 4; k++) {
        d = veer_default_drive_def(VEER_DRIVE_MECANUM);
        d.roller_angle = bad_roller[k];
        expect_check_fails(&d, VEER_ERR_VALUE, "roller");
    }

    d = veer_default_drive_def(VEER_DRIVE_DIFFERENTIAL);
    d.track_width = -0.5;
    expect_check_fails(&d, VEER_ERR_VALUE, "track");
    d = veer_default_drive_def(VEER_DRIVE_DIFFERENTIAL);
    d.skid_factor = 0.9;
    expect_check_fails(&d, VEER_ERR_VALUE, "skid");
    d.skid_factor = DINF;
    expect_check_fails(&d, VEER_ERR_VALUE, "skid");

    d = veer_default_drive_def(VEER_DRIVE_OMNI);
    d.modules[1].drive_angle = DNAN;
    expect_check_fails(&d, VEER_ERR_VALUE, "module 1");
    d = veer_default_drive_def(VEER_DRIVE_OMNI);
    d.modules[2].x = DINF;
    expect_check_fails(&d, VEER_ERR_VALUE, "module 2");
}

Test(drive, check_refuses_rank_deficient_omni) {
    /* Linear algebra: three unknowns need rank 3. All wheels parallel leave
     * the motion across them unmeasured; push lines through one common point
     * leave the turn about that point unmeasured. */
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_OMNI);
    d.module_count = 4;
    for (int i = 0; i < 4; i++) {
        d.modules[i].x = 0.3 * i - 0.4;
        d.modules[i].y = 0.2 * (i % 2);
        d.modules[i].drive_angle = (i % 2) ? PI / 2 : -PI / 2; /* parallel, some reversed */
    }
    expect_check_fails(&d, VEER_ERR_GEOMETRY, "parallel");
    for (int i = 0; i < 4; i++) { /* radial wheels: every push line through the centre */
        const double a = 2.0 * PI * i / 4.0 + 0.3;
        d.modules[i].x = 0.3 * cos(a);
        d.modules[i].y = 0.3 * sin(a);
        d.modules[i].drive_angle = a;
    }
    expect_check_fails(&d, VEER_ERR_GEOMETRY, "rank");
    for (int i = 0; i < 4; i++) { /* push lines all through (1, 2), off-centre */
        d.modules[i].x = uni(&gen, -0.5, 0.5);
        d.modules[i].y = uni(&gen, -0.5, 0.5);
        d.modules[i].drive_angle = atan2(2.0 - d.modules[i].y, 1.0 - d.modules[i].x);
    }
    expect_check_fails(&d, VEER_ERR_GEOMETRY, "rank");
    for (int i = 0; i < 4; i++) { /* all at one point */
        d.modules[i].x = 0.1;
        d.modules[i].y = -0.2;
        d.modules[i].drive_angle = i;
    }
    expect_check_fails(&d, VEER_ERR_GEOMETRY, "one point");
    /* nearly concurrent (one radial wheel tilted 1e-6 rad): numerically
     * rank 3, but the turn is measured ~1e12 times worse than translation */
    for (int i = 0; i < 4; i++) {
        const double a = 2.0 * PI * i / 4.0;
        d.modules[i].x = 0.3 * cos(a);
        d.modules[i].y = 0.3 * sin(a);
        d.modules[i].drive_angle = a + (i == 0 ? 1e-6 : 0.0);
    }
    expect_check_fails(&d, VEER_ERR_GEOMETRY, "rank");
    /* a real tilt of one radial wheel makes it well posed again */
    for (int i = 0; i < 4; i++) {
        const double a = 2.0 * PI * i / 4.0;
        d.modules[i].x = 0.3 * cos(a);
        d.modules[i].y = 0.3 * sin(a);
        d.modules[i].drive_angle = a + (i == 0 ? 0.3 : 0.0);
    }
    cr_assert_eq(veer_drive_check(&d, NULL), VEER_OK);
}

Test(drive, kinematics_refuse_bad_arguments) {
    /* Input rules of drive.h: NULL -> ERR_NULL, NaN -> ERR_VALUE, nothing written. */
    const veer_drive_kind kinds[4] = {VEER_DRIVE_STEERED, VEER_DRIVE_MECANUM, VEER_DRIVE_OMNI,
                                      VEER_DRIVE_DIFFERENTIAL};
    for (int k = 0; k < 4; k++) {
        veer_drive_def d = veer_default_drive_def(kinds[k]);
        const int n = veer_drive_module_count(&d);
        double steer[VEER_MAX_MODULES], rate[VEER_MAX_MODULES], tw[3];
        fill(steer, VEER_MAX_MODULES, SENTINEL);
        fill(rate, VEER_MAX_MODULES, SENTINEL);
        fill(tw, 3, SENTINEL);
        const double good[3] = {0.5, 0.2, 0.3};
        cr_assert_eq(veer_drive_inverse(NULL, good, NULL, steer, rate), VEER_ERR_NULL);
        cr_assert_eq(veer_drive_inverse(&d, NULL, NULL, steer, rate), VEER_ERR_NULL);
        cr_assert_eq(veer_drive_inverse(&d, good, NULL, NULL, rate), VEER_ERR_NULL);
        cr_assert_eq(veer_drive_inverse(&d, good, NULL, steer, NULL), VEER_ERR_NULL);
        const double nan_tw[3][3] = {{DNAN, 0, 0}, {0, DNAN, 0}, {0, 0, DINF}};
        for (int j = 0; j < 3; j++)
            cr_assert_eq(veer_drive_inverse(&d, nan_tw[j], NULL, steer, rate), VEER_ERR_VALUE);
        const double huge[3] = {1e308, 1e308, 1e308}; /* overflows to inf: refused, not returned */
        cr_assert_eq(veer_drive_inverse(&d, huge, NULL, steer, rate), VEER_ERR_VALUE);
        if (kinds[k] == VEER_DRIVE_STEERED) {
            double prev[VEER_MAX_MODULES] = {0};
            prev[n - 1] = DNAN;
            cr_assert_eq(veer_drive_inverse(&d, good, prev, steer, rate), VEER_ERR_VALUE);
        }
        const double st[VEER_MAX_MODULES] = {0};
        double u[VEER_MAX_MODULES] = {1, 2, 3, 4, 5, 6, 7, 8};
        cr_assert_eq(veer_drive_forward(NULL, st, u, tw), VEER_ERR_NULL);
        cr_assert_eq(veer_drive_forward(&d, st, NULL, tw), VEER_ERR_NULL);
        cr_assert_eq(veer_drive_forward(&d, st, u, NULL), VEER_ERR_NULL);
        u[n - 1] = DNAN;
        cr_assert_eq(veer_drive_forward(&d, st, u, tw), VEER_ERR_VALUE);
        u[n - 1] = 1.0;
        if (kinds[k] == VEER_DRIVE_STEERED) {
            cr_assert_eq(veer_drive_forward(&d, NULL, u, tw), VEER_ERR_NULL);
            double bad_st[VEER_MAX_MODULES] = {0};
            bad_st[1] = DNAN;
            cr_assert_eq(veer_drive_forward(&d, bad_st, u, tw), VEER_ERR_VALUE);
        } else {
            /* fixed-wheel kinds ignore steer: NULL is fine */
            double t2[3];
            cr_assert_eq(veer_drive_forward(&d, NULL, u, t2), VEER_OK);
        }
        expect_untouched(steer, VEER_MAX_MODULES);
        expect_untouched(rate, VEER_MAX_MODULES);
        expect_untouched(tw, 3);
    }
}
