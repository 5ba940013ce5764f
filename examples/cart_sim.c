/* cart_sim: a simulated target cart on the radio link, over UDP on
 * 127.0.0.1 only.
 *
 * It listens on a UDP port, takes every datagram as a radio frame, runs the
 * player (include/veer/player.h) at the control rate (50 Hz by default),
 * integrates its own module setpoints through the drive's forward
 * kinematics (odometry: the motor controllers follow each module's
 * commanded rate and acceleration), answers gap reports and reports to
 * whoever sent it the last frame (a report for every command that changed
 * something, at most four a second for heartbeats), and reports its state
 * twice a second.
 * The cart stands at the plan's start pose when its first plan arms.
 *
 *   cart_sim --config CONFIG --key-file KEY [--port N] [--rate HZ]
 *            [--trace CSV] [--summary JSON] [--exit-after-stop S] [--max-time S]
 *
 * CONFIG holds a veer.v1.CartConfig message (link.proto): cart number,
 * name, drive, limits, link timeout, frame size. KEY holds the cart's
 * 32-byte key as 64 hex digits; the key is never printed. With --port 0
 * (the default) the system picks a free port; the first line on stdout says
 * which: "cart_sim: listening on 127.0.0.1:PORT". The summary (JSON) has the
 * final odometry pose, the plan's final pose, the stop, the largest
 * setpoint-to-limit ratios and the frame counts by reason.
 * SPDX-License-Identifier: MIT */
#define _POSIX_C_SOURCE 200809L
#include <arpa/inet.h>
#include <errno.h>
#include <math.h>
#include <netinet/in.h>
#include <poll.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <time.h>
#include <unistd.h>
#include <veer/veer.h>
#include <veer/link.h>
#include <veer/player.h>

static volatile sig_atomic_t quit_requested;
static void on_signal(int sig) {
    (void)sig;
    quit_requested = 1;
}

static double clock_now(void) {
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int fail(const char *what) {
    fprintf(stderr, "cart_sim: %s\n", what);
    return 2;
}

static unsigned char *read_file(const char *path, size_t *size) {
    FILE *f = fopen(path, "rb");
    if (!f) return NULL;
    size_t cap = 1 << 16, n = 0;
    unsigned char *buf = malloc(cap);
    while (buf) {
        size_t got = fread(buf + n, 1, cap - n, f);
        n += got;
        if (got == 0) break;
        if (n == cap) {
            unsigned char *nb = realloc(buf, cap * 2);
            if (!nb) {
                free(buf);
                buf = NULL;
                break;
            }
            buf = nb, cap *= 2;
        }
    }
    fclose(f);
    *size = n;
    return buf;
}

/* 64 hex digits (surrounding white space allowed) -> 32 bytes. */
static int read_key(const char *path, uint8_t key[VEER_LINK_KEY_BYTES]) {
    size_t n;
    unsigned char *b = read_file(path, &n);
    if (!b) return -1;
    int k = 0, half = -1, ok = 1;
    for (size_t i = 0; i < n && ok; i++) {
        int c = b[i], v;
        if (c >= '0' && c <= '9') v = c - '0';
        else if (c >= 'a' && c <= 'f') v = c - 'a' + 10;
        else if (c >= 'A' && c <= 'F') v = c - 'A' + 10;
        else if (c == ' ' || c == '\n' || c == '\r' || c == '\t') continue;
        else {
            ok = 0;
            break;
        }
        if (half < 0) half = v;
        else if (k < VEER_LINK_KEY_BYTES) key[k++] = (uint8_t)(half << 4 | v), half = -1;
        else ok = 0;
    }
    memset(b, 0, n);
    free(b);
    return ok && k == VEER_LINK_KEY_BYTES && half < 0 ? 0 : -1;
}

/* Odometry over one control period: the module setpoints followed by their
 * motor controllers (steer + steer_rate tau, wheel_rate + wheel_accel tau),
 * through the drive's forward kinematics, in ten sub-steps. */
static void odometry(const veer_drive_def *d, const veer_sample *o, double dt, double pose[3]) {
    const int K = 10;
    double h = dt / K;
    for (int j = 0; j < K; j++) {
        double tau = (j + 0.5) * h, steer[VEER_MAX_MODULES], wheel[VEER_MAX_MODULES], tw[3];
        for (int i = 0; i < o->module_count; i++) {
            steer[i] = o->modules[i].steer + o->modules[i].steer_rate * tau;
            wheel[i] = o->modules[i].wheel_rate + o->modules[i].wheel_accel * tau;
        }
        if (veer_drive_forward(d, steer, wheel, tw) != VEER_OK) return;
        double yaw = pose[2] + 0.5 * tw[2] * h;
        pose[0] += (tw[0] * cos(yaw) - tw[1] * sin(yaw)) * h;
        pose[1] += (tw[0] * sin(yaw) + tw[1] * cos(yaw)) * h;
        pose[2] += tw[2] * h;
    }
}

typedef struct {
    int fd;
    struct sockaddr_in peer;
    int have_peer;
    unsigned long frames_in, bytes_in, frames_out, bytes_out;
} udp_link;

static void send_frame(udp_link *u, const uint8_t *b, size_t n) {
    if (!u->have_peer) return;
    if (sendto(u->fd, b, n, 0, (const struct sockaddr *)&u->peer, sizeof u->peer) == (ssize_t)n)
        u->frames_out++, u->bytes_out += n;
}

/* Largest |value| / limit seen, per kind. */
typedef struct {
    double wheel_rate, wheel_accel, steer_rate, wheel_accel_fd; /* fd: finite differences of wheel_rate */
} ratios;

static void note_ratios(ratios *r, const veer_limits *l, const veer_sample *o, const veer_sample *prev, double dt) {
    for (int i = 0; i < o->module_count; i++) {
        const veer_module_limits *m = &l->modules[i];
        if (isfinite(m->wheel_rate)) r->wheel_rate = fmax(r->wheel_rate, fabs(o->modules[i].wheel_rate) / m->wheel_rate);
        if (isfinite(m->wheel_accel)) {
            r->wheel_accel = fmax(r->wheel_accel, fabs(o->modules[i].wheel_accel) / m->wheel_accel);
            if (prev)
                r->wheel_accel_fd = fmax(r->wheel_accel_fd, fabs(o->modules[i].wheel_rate - prev->modules[i].wheel_rate) /
                                                                (dt * m->wheel_accel));
        }
        if (isfinite(m->steer_rate)) r->steer_rate = fmax(r->steer_rate, fabs(o->modules[i].steer_rate) / m->steer_rate);
    }
}

static void print_ratios(FILE *f, const char *name, const ratios *r) {
    fprintf(f, "  \"%s\": {\"wheel_rate\": %.6f, \"wheel_accel\": %.6f, \"steer_rate\": %.6f, "
               "\"wheel_accel_from_rates\": %.6f}",
            name, r->wheel_rate, r->wheel_accel, r->steer_rate, r->wheel_accel_fd);
}

int main(int argc, char **argv) {
    const char *config_path = NULL, *key_path = NULL, *trace_path = NULL, *summary_path = NULL;
    int port = 0;
    double rate = 50.0, exit_after_stop = -1.0, max_time = 600.0;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i], *v = i + 1 < argc ? argv[i + 1] : NULL;
        if (!strcmp(a, "--config") && v) config_path = v, i++;
        else if (!strcmp(a, "--key-file") && v) key_path = v, i++;
        else if (!strcmp(a, "--port") && v) port = atoi(v), i++;
        else if (!strcmp(a, "--rate") && v) rate = atof(v), i++;
        else if (!strcmp(a, "--trace") && v) trace_path = v, i++;
        else if (!strcmp(a, "--summary") && v) summary_path = v, i++;
        else if (!strcmp(a, "--exit-after-stop") && v) exit_after_stop = atof(v), i++;
        else if (!strcmp(a, "--max-time") && v) max_time = atof(v), i++;
        else {
            fprintf(stderr, "usage: cart_sim --config CONFIG --key-file KEY [--port N] [--rate HZ] [--trace CSV] "
                            "[--summary JSON] [--exit-after-stop S] [--max-time S]\n");
            return 2;
        }
    }
    if (!config_path || !key_path) return fail("--config and --key-file are required");
    if (!(rate >= 1.0 && rate <= 1000.0)) return fail("--rate must be 1..1000 Hz");
    if (port < 0 || port > 65535) return fail("--port must be 0..65535");

    /* The cart's configuration and key. */
    size_t cn;
    unsigned char *cb = read_file(config_path, &cn);
    if (!cb) return fail("cannot read the config file");
    veer_player_def def;
    veer_diag diag;
    veer_status st = veer_player_def_from_pb(cb, cn, &def, &diag);
    free(cb);
    if (st != VEER_OK) {
        fprintf(stderr, "cart_sim: config: %s\n", diag.message);
        return 2;
    }
    if (read_key(key_path, def.link.key) != 0) return fail("the key file must hold 64 hex digits");
    size_t mem_size = veer_player_size_for(&def); /* sized by the config's capacities */
    void *mem = aligned_alloc(16, (mem_size + 15) / 16 * 16);
    if (!mem) return fail("out of memory");
    veer_player *player = NULL;
    st = veer_player_init(mem, mem_size, &def, &player, &diag);
    memset(def.link.key, 0, sizeof def.link.key);
    if (st != VEER_OK) {
        fprintf(stderr, "cart_sim: %s\n", diag.message);
        return 2;
    }

    /* 127.0.0.1 only. */
    udp_link u;
    memset(&u, 0, sizeof u);
    u.fd = socket(AF_INET, SOCK_DGRAM, 0);
    if (u.fd < 0) return fail("no UDP socket");
    struct sockaddr_in addr;
    memset(&addr, 0, sizeof addr);
    addr.sin_family = AF_INET;
    addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    addr.sin_port = htons((uint16_t)port);
    if (bind(u.fd, (struct sockaddr *)&addr, sizeof addr) != 0) return fail("cannot bind 127.0.0.1");
    socklen_t al = sizeof addr;
    getsockname(u.fd, (struct sockaddr *)&addr, &al);
    printf("cart_sim: listening on 127.0.0.1:%d\n", ntohs(addr.sin_port));
    fflush(stdout);
    signal(SIGINT, on_signal);
    signal(SIGTERM, on_signal);

    FILE *trace = trace_path ? fopen(trace_path, "w") : NULL;
    int M = veer_drive_module_count(&def.drive);
    if (trace) {
        fprintf(trace, "time,state,plan_t,s,sdot,plan_x,plan_y,plan_yaw,x,y,yaw");
        for (int i = 0; i < M; i++)
            fprintf(trace, ",steer%d,steer_rate%d,wheel_rate%d,wheel_accel%d", i, i, i, i);
        fprintf(trace, "\n");
    }

    double dt = 1.0 / rate, t0 = clock_now(), next_tick = t0, next_report = t0, stopped_since = -1.0;
    double pose[3] = {0.0, 0.0, 0.0}, t_prev = 0.0, last_report = 0.0;
    int placed = 0, prev_state = VEER_PLAYER_IDLE;
    ratios run_r = {0}, stop_r = {0};
    veer_sample out, prev_out;
    int have_prev = 0;
    double stop_begin = -1.0, stop_end = -1.0, stop_s0 = 0.0, stop_t0 = 0.0;
    uint8_t buf[2048], reply[VEER_LINK_FRAME_MAX];
    while (!quit_requested) {
        double now = clock_now();
        if (now - t0 > max_time) break;
        /* frames until the next tick */
        int wait_ms = (int)ceil((next_tick - now) * 1000.0);
        struct pollfd pf = {u.fd, POLLIN, 0};
        int pr = poll(&pf, 1, wait_ms > 0 ? wait_ms : 0);
        if (pr > 0 && (pf.revents & POLLIN)) {
            struct sockaddr_in from;
            socklen_t fl = sizeof from;
            ssize_t n = recvfrom(u.fd, buf, sizeof buf, 0, (struct sockaddr *)&from, &fl);
            if (n >= 0 && from.sin_addr.s_addr == htonl(INADDR_LOOPBACK)) {
                u.frames_in++, u.bytes_in += (unsigned long)n;
                u.peer = from, u.have_peer = 1;
                veer_player_event ev;
                int was = 0;
                veer_link_report r0;
                if (veer_player_status(player, &r0) == VEER_OK) was = r0.state;
                if (veer_player_frame(player, buf, (size_t)n, clock_now() - t0, &ev) == VEER_OK) {
                    size_t rn;
                    if (ev.armed && !placed && (was == VEER_PLAYER_IDLE)) {
                        veer_sample s0;
                        if (veer_plan_sample(veer_player_plan(player), 0.0, &s0) == VEER_OK) {
                            memcpy(pose, s0.pose, sizeof pose);
                            placed = 1;
                        }
                    }
                    if (ev.link.gaps_due && veer_player_gap_frame(player, reply, sizeof reply, &rn) == VEER_OK)
                        send_frame(&u, reply, rn);
                    /* A report answers every command that changed something; plain
                     * heartbeats get one at most every 0.25 s (air time). */
                    double tf = clock_now();
                    int news = ev.armed || ev.started || ev.stopped || ev.reason != VEER_LINK_NONE;
                    if (ev.report_due && (news || tf - last_report >= 0.25) &&
                        veer_player_report_frame(player, reply, sizeof reply, &rn) == VEER_OK) {
                        send_frame(&u, reply, rn);
                        last_report = tf;
                    }
                }
            }
            continue;
        }
        if (now < next_tick) continue;
        /* a control tick */
        double t = now - t0;
        next_tick += dt;
        if (next_tick < now) next_tick = now + dt; /* fell behind: no burst of catch-up ticks */
        /* The motors followed the previous setpoints until now. */
        double h = have_prev ? t - t_prev : dt;
        if (have_prev) odometry(&def.drive, &prev_out, h, pose);
        t_prev = t;
        if (veer_player_step(player, t, &out) != VEER_OK) continue;
        veer_link_report rep;
        if (veer_player_status(player, &rep) != VEER_OK) continue;
        if (rep.state == VEER_PLAYER_RUNNING) note_ratios(&run_r, &def.limits, &out, have_prev ? &prev_out : NULL, h);
        if (rep.state == VEER_PLAYER_STOPPING || (prev_state == VEER_PLAYER_STOPPING))
            note_ratios(&stop_r, &def.limits, &out, have_prev ? &prev_out : NULL, h);
        if (prev_state == VEER_PLAYER_RUNNING && rep.state != VEER_PLAYER_RUNNING) {
            stop_begin = t;
            stop_s0 = have_prev ? prev_out.s : out.s;
            stop_t0 = have_prev ? prev_out.t : out.t;
        }
        if (rep.state == VEER_PLAYER_STOPPED && prev_state != VEER_PLAYER_STOPPED) stop_end = t, stopped_since = t;
        if (rep.state != VEER_PLAYER_STOPPED) stopped_since = -1.0;
        prev_state = rep.state;
        prev_out = out, have_prev = 1;
        if (trace) {
            fprintf(trace, "%.4f,%s,%.4f,%.6f,%.6f,%.6f,%.6f,%.6f,%.6f,%.6f,%.6f", t,
                    veer_player_state_name(rep.state), out.t, out.s, out.sdot, out.pose[0], out.pose[1], out.pose[2],
                    pose[0], pose[1], pose[2]);
            for (int i = 0; i < out.module_count; i++)
                fprintf(trace, ",%.6f,%.6f,%.6f,%.6f", out.modules[i].steer, out.modules[i].steer_rate,
                        out.modules[i].wheel_rate, out.modules[i].wheel_accel);
            fprintf(trace, "\n");
        }
        if (now >= next_report) {
            size_t rn;
            next_report = now + 0.5;
            if (veer_player_report_frame(player, reply, sizeof reply, &rn) == VEER_OK) {
                send_frame(&u, reply, rn);
                last_report = now;
            }
        }
        if (exit_after_stop >= 0.0 && stopped_since >= 0.0 && t - stopped_since >= exit_after_stop) break;
    }

    /* The summary. */
    veer_link_report rep;
    st = veer_player_status(player, &rep);
    FILE *f = summary_path ? fopen(summary_path, "w") : stdout;
    if (f && st == VEER_OK) {
        const veer_plan *plan = veer_player_plan(player);
        veer_sample end;
        memset(&end, 0, sizeof end);
        if (plan) st = veer_plan_sample(plan, veer_plan_duration(plan), &end);
        fprintf(f, "{\n  \"state\": \"%s\",\n  \"stop_reason\": \"%s\",\n  \"last_rejection\": \"%s\",\n",
                veer_player_state_name(rep.state), veer_stop_reason_name(rep.stop_reason),
                veer_link_reason_name(rep.last_rejection));
        fprintf(f, "  \"plan_id\": %llu,\n  \"accepted_plan_id\": %llu,\n", (unsigned long long)rep.plan_id,
                (unsigned long long)rep.accepted_plan_id);
        fprintf(f, "  \"player_memory_bytes\": %zu,\n", mem_size);
        fprintf(f, "  \"pose\": [%.9f, %.9f, %.9f],\n", pose[0], pose[1], pose[2]);
        fprintf(f, "  \"reported_pose\": [%.9f, %.9f, %.9f],\n", rep.pose[0], rep.pose[1], rep.pose[2]);
        fprintf(f, "  \"plan_end_pose\": [%.9f, %.9f, %.9f],\n", end.pose[0], end.pose[1], end.pose[2]);
        fprintf(f, "  \"plan_duration\": %.6f,\n  \"s\": %.9f,\n", plan ? veer_plan_duration(plan) : 0.0, rep.s);
        fprintf(f, "  \"stop\": {\"clock_begin\": %.4f, \"clock_end\": %.4f, \"plan_t\": %.6f, \"s_begin\": %.9f, "
                   "\"s_end\": %.9f},\n",
                stop_begin, stop_end, stop_t0, stop_s0, rep.s);
        print_ratios(f, "run_ratios", &run_r);
        fprintf(f, ",\n");
        print_ratios(f, "stop_ratios", &stop_r);
        fprintf(f, ",\n  \"frames_in\": %lu,\n  \"bytes_in\": %lu,\n  \"frames_out\": %lu,\n  \"bytes_out\": %lu,\n",
                u.frames_in, u.bytes_in, u.frames_out, u.bytes_out);
        fprintf(f, "  \"frames_by_reason\": {");
        const veer_link_receiver *rx = veer_player_receiver(player);
        int first = 1;
        for (int r = 0; r < VEER_LINK_REASON_COUNT; r++) {
            uint32_t c = veer_link_receiver_count(rx, r);
            if (!c) continue;
            fprintf(f, "%s\"%s\": %u", first ? "" : ", ", veer_link_reason_name(r), (unsigned)c);
            first = 0;
        }
        fprintf(f, "}\n}\n");
        if (f != stdout) fclose(f);
    }
    if (trace) fclose(trace);
    close(u.fd);
    free(mem);
    return 0;
}
