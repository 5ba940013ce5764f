/* Drive descriptions: defaults, checks, and the dispatch of inverse and
 * forward kinematics to the per-kind files (drive_steered.c, drive_mecanum.c,
 * drive_omni.c, drive_differential.c). No heap; everything fits on the stack.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "internal.h"

static int known_kind(veer_drive_kind kind) {
    return kind == VEER_DRIVE_STEERED || kind == VEER_DRIVE_MECANUM || kind == VEER_DRIVE_OMNI ||
           kind == VEER_DRIVE_DIFFERENTIAL;
}

veer_drive_def veer_default_drive_def(veer_drive_kind kind) {
    veer_drive_def d;
    memset(&d, 0, sizeof d);
    d.kind = kind;
    if (!known_kind(kind)) return d;
    /* Every kind gets every scalar, so changing kind afterwards stays valid. */
    d.wheel_radius = 0.1;
    d.half_wheelbase = 0.3;
    d.half_track = 0.25;
    d.roller_angle = VEER_PI / 4.0;
    d.track_width = 0.5;
    d.skid_factor = 1.0;
    switch (kind) {
    case VEER_DRIVE_STEERED: {
        static const double corner[4][2] = {{0.3, 0.3}, {0.3, -0.3}, {-0.3, -0.3}, {-0.3, 0.3}};
        d.module_count = 4;
        for (int i = 0; i < 4; i++) {
            d.modules[i].x = corner[i][0];
            d.modules[i].y = corner[i][1];
        }
        break;
    }
    case VEER_DRIVE_OMNI:
        /* Three wheels 120 degrees apart on a 0.3 m circle, pushing counter-clockwise. */
        d.module_count = 3;
        for (int i = 0; i < 3; i++) {
            double a = 2.0 * VEER_PI * i / 3.0;
            d.modules[i].x = 0.3 * cos(a);
            d.modules[i].y = 0.3 * sin(a);
            d.modules[i].drive_angle = a + VEER_PI / 2.0;
        }
        break;
    case VEER_DRIVE_MECANUM:
        d.module_count = 4;
        break;
    case VEER_DRIVE_DIFFERENTIAL:
        d.module_count = 2;
        break;
    default:
        break;
    }
    return d;
}

int veer_drive_module_count(const veer_drive_def *drive) {
    if (!drive) return 0;
    switch (drive->kind) {
    case VEER_DRIVE_STEERED:
        return drive->module_count >= 2 && drive->module_count <= VEER_MAX_MODULES ? drive->module_count : 0;
    case VEER_DRIVE_OMNI:
        return drive->module_count >= 3 && drive->module_count <= VEER_MAX_MODULES ? drive->module_count : 0;
    case VEER_DRIVE_MECANUM:
        return 4;
    case VEER_DRIVE_DIFFERENTIAL:
        return 2;
    default:
        return 0;
    }
}

veer_status veer_drive_check(const veer_drive_def *drive, veer_diag *diag) {
    if (!drive) return VEER__DRIVE_FAIL(diag, VEER_ERR_NULL, "drive is NULL");
    int n = drive->module_count;
    veer_status st;
    switch (drive->kind) {
    case VEER_DRIVE_STEERED:
        if (n < 2 || n > VEER_MAX_MODULES)
            return VEER__DRIVE_FAIL(diag, VEER_ERR_CAPACITY, "steered drive needs 2..%d modules, got %d",
                                    VEER_MAX_MODULES, n);
        break;
    case VEER_DRIVE_OMNI:
        if (n < 3 || n > VEER_MAX_MODULES)
            return VEER__DRIVE_FAIL(diag, VEER_ERR_CAPACITY, "omni drive needs 3..%d wheels, got %d",
                                    VEER_MAX_MODULES, n);
        break;
    case VEER_DRIVE_MECANUM:
        if (n != 4)
            return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE,
                                    "mecanum drive has exactly 4 wheels (module_count 4, as set by the defaults), "
                                    "got module_count %d",
                                    n);
        break;
    case VEER_DRIVE_DIFFERENTIAL:
        if (n != 2)
            return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE,
                                    "differential drive has exactly 2 sides (module_count 2, as set by the defaults), "
                                    "got module_count %d",
                                    n);
        break;
    default:
        return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE, "unknown drive kind %d", (int)drive->kind);
    }
    if (!veer__length_ok(drive->wheel_radius))
        return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE, "wheel radius must be in [1e-4, 1e3] m, got %g",
                                drive->wheel_radius);
    int working = 0;
    for (int i = 0; i < n; i++) {
        if (drive->modules[i].out != 0 && drive->modules[i].out != 1)
            return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE, "module %d: out must be 0 or 1, got %d", i,
                                    drive->modules[i].out);
        working += !drive->modules[i].out;
    }
    if (drive->kind == VEER_DRIVE_DIFFERENTIAL && working < 2)
        return veer__fail(diag, VEER_ERR_INFEASIBLE, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_MODULE_OUT, -1),
                          "a differential drive with a side out cannot drive under control");
    if (working < 2)
        return veer__fail(diag, VEER_ERR_INFEASIBLE, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_MODULE_OUT, -1),
                          "only %d module%s working: at least 2 are needed", working, working == 1 ? "" : "s");
    switch (drive->kind) {
    case VEER_DRIVE_STEERED:
        st = veer__drive_steered_check(drive, diag);
        break;
    case VEER_DRIVE_OMNI:
        st = veer__drive_omni_check(drive, diag);
        break;
    case VEER_DRIVE_MECANUM:
        st = veer__drive_mecanum_check(drive, diag);
        break;
    default:
        st = veer__drive_differential_check(drive, diag);
        break;
    }
    if (st == VEER_OK) veer__diag_ok(diag);
    return st;
}

int veer__drive_wheel_matrix(const veer_drive_def *drive, double J[VEER_MAX_MODULES][3]) {
    if (!drive || !J || veer_drive_module_count(drive) == 0) return 0;
    switch (drive->kind) {
    case VEER_DRIVE_MECANUM:
        return veer__drive_mecanum_matrix(drive, J);
    case VEER_DRIVE_OMNI:
        return veer__drive_omni_matrix(drive, J);
    case VEER_DRIVE_DIFFERENTIAL:
        return veer__drive_differential_matrix(drive, J);
    default:
        return 0;
    }
}

int veer__drive_driven(const veer_drive_def *drive, const double twist[3]) {
    int n = veer_drive_module_count(drive), count = 0;
    double J[VEER_MAX_MODULES][3], rate[VEER_MAX_MODULES], top = 0.0;
    if (veer__drive_wheel_matrix(drive, J) == 0) { /* steered: every working module can push any way */
        for (int i = 0; i < n; i++) count += !drive->modules[i].out;
        return count;
    }
    /* Traction along a direction no working wheel pushes: the component of
     * the twist in the null space of the working wheels' rows. */
    double N[3][3] = {{0.0}}, b[3] = {0.0, 0.0, 0.0}, t[3];
    for (int i = 0; i < n; i++) {
        rate[i] = J[i][0] * twist[0] + J[i][1] * twist[1] + J[i][2] * twist[2];
        if (fabs(rate[i]) > top) top = fabs(rate[i]);
        if (drive->modules[i].out) continue;
        for (int r = 0; r < 3; r++) {
            b[r] += J[i][r] * rate[i];
            for (int c = 0; c < 3; c++) N[r][c] += J[i][r] * J[i][c];
        }
    }
    if (veer__drive_solve3((const double(*)[3])N, b, t) != 0) return 0; /* a direction is not driven at all */
    for (int i = 0; i < n; i++) count += !drive->modules[i].out && fabs(rate[i]) > 1e-3 * top;
    return count;
}

void veer__module_position(const veer_drive_def *drive, int i, double r[2]) {
    static const double sign[4][2] = {{1.0, 1.0}, {1.0, -1.0}, {-1.0, -1.0}, {-1.0, 1.0}};
    switch (drive->kind) {
    case VEER_DRIVE_MECANUM: /* front-left, front-right, rear-right, rear-left */
        r[0] = sign[i & 3][0] * drive->half_wheelbase;
        r[1] = sign[i & 3][1] * drive->half_track;
        break;
    case VEER_DRIVE_DIFFERENTIAL: /* left, right */
        r[0] = 0.0;
        r[1] = (i == 0 ? 0.5 : -0.5) * drive->track_width;
        break;
    default:
        r[0] = drive->modules[i].x;
        r[1] = drive->modules[i].y;
        break;
    }
}

int veer__drive_solve3(const double N[3][3], const double b[3], double x[3]) {
    double L[3][3] = {{0.0}};
    double y[3];
    for (int j = 0; j < 3; j++) {
        double d = N[j][j];
        for (int k = 0; k < j; k++) d -= L[j][k] * L[j][k];
        /* The pivot relative to its diagonal entry does not change when the
         * unknowns are rescaled (m/s against rad/s). NaN fails here too. */
        if (!(d > 1e-12 * N[j][j])) return -1;
        L[j][j] = sqrt(d);
        for (int i = j + 1; i < 3; i++) {
            double v = N[i][j];
            for (int k = 0; k < j; k++) v -= L[i][k] * L[j][k];
            L[i][j] = v / L[j][j];
        }
    }
    for (int i = 0; i < 3; i++) {
        double v = b[i];
        for (int k = 0; k < i; k++) v -= L[i][k] * y[k];
        y[i] = v / L[i][i];
    }
    double t[3];
    for (int i = 2; i >= 0; i--) {
        double v = y[i];
        for (int k = i + 1; k < 3; k++) v -= L[k][i] * t[k];
        t[i] = v / L[i][i];
    }
    x[0] = t[0];
    x[1] = t[1];
    x[2] = t[2];
    return 0;
}

static int all_finite(const double *v, int n) {
    for (int i = 0; i < n; i++)
        if (!veer__finite(v[i])) return 0;
    return 1;
}

veer_status veer_drive_inverse(const veer_drive_def *drive, const double twist_body[3], const double *prev_steer,
                               double *steer, double *wheel_rate) {
    if (!drive || !twist_body || !steer || !wheel_rate) return VEER_ERR_NULL;
    veer_status st = veer_drive_check(drive, NULL);
    if (st != VEER_OK) return st;
    if (!all_finite(twist_body, 3)) return VEER_ERR_VALUE;
    int n = veer_drive_module_count(drive);
    /* Results go to locals first: nothing is written on failure, and steer may
     * be the same array as prev_steer. */
    double s[VEER_MAX_MODULES], w[VEER_MAX_MODULES];
    if (drive->kind == VEER_DRIVE_STEERED) {
        if (prev_steer && !all_finite(prev_steer, n)) return VEER_ERR_VALUE;
        veer__drive_steered_inverse(drive, twist_body, prev_steer, s, w);
    } else {
        double J[VEER_MAX_MODULES][3];
        veer__drive_wheel_matrix(drive, J);
        for (int i = 0; i < n; i++) {
            w[i] = drive->modules[i].out ? 0.0
                                         : J[i][0] * twist_body[0] + J[i][1] * twist_body[1] + J[i][2] * twist_body[2];
            s[i] = drive->kind == VEER_DRIVE_OMNI ? drive->modules[i].drive_angle : 0.0;
        }
    }
    if (!all_finite(s, n) || !all_finite(w, n)) return VEER_ERR_VALUE; /* overflow from a huge twist */
    memcpy(steer, s, (size_t)n * sizeof s[0]);
    memcpy(wheel_rate, w, (size_t)n * sizeof w[0]);
    return VEER_OK;
}

veer_status veer_drive_driven_wheels(const veer_drive_def *drive, const double twist_body[3], int *count) {
    if (!drive || !twist_body || !count) return VEER_ERR_NULL;
    veer_status st = veer_drive_check(drive, NULL);
    if (st != VEER_OK) return st;
    if (!all_finite(twist_body, 3)) return VEER_ERR_VALUE;
    *count = veer__drive_driven(drive, twist_body);
    return VEER_OK;
}

veer_status veer_drive_forward(const veer_drive_def *drive, const double *steer, const double *wheel_rate,
                               double twist_body[3]) {
    if (!drive || !wheel_rate || !twist_body) return VEER_ERR_NULL;
    veer_status st = veer_drive_check(drive, NULL);
    if (st != VEER_OK) return st;
    int n = veer_drive_module_count(drive);
    if (!all_finite(wheel_rate, n)) return VEER_ERR_VALUE;
    double t[3];
    if (drive->kind == VEER_DRIVE_STEERED) {
        if (!steer) return VEER_ERR_NULL;
        if (!all_finite(steer, n)) return VEER_ERR_VALUE;
        if (veer__drive_steered_forward(drive, steer, wheel_rate, t) != 0) return VEER_ERR_GEOMETRY;
    } else if (drive->kind == VEER_DRIVE_DIFFERENTIAL) {
        veer__drive_differential_forward(drive, wheel_rate, t);
    } else {
        /* Least squares through the normal equations (J^T J) t = J^T u. */
        double J[VEER_MAX_MODULES][3], N[3][3] = {{0.0}}, b[3] = {0.0, 0.0, 0.0};
        veer__drive_wheel_matrix(drive, J);
        for (int i = 0; i < n; i++)
            for (int r = 0; r < 3 && !drive->modules[i].out; r++) {
                b[r] += J[i][r] * wheel_rate[i];
                for (int c = 0; c < 3; c++) N[r][c] += J[i][r] * J[i][c];
            }
        if (veer__drive_solve3((const double(*)[3])N, b, t) != 0) return VEER_ERR_GEOMETRY;
    }
    if (!all_finite(t, 3)) return VEER_ERR_VALUE;
    twist_body[0] = t[0];
    twist_body[1] = t[1];
    twist_body[2] = t[2];
    return VEER_OK;
}
