/* The smallest cart: what a cart's controller links of veer, for the code
 * and RAM size figures (bench/size.py links it with --gc-sections and reads
 * the linker map). Frames come in on stdin as a 2-byte length and the
 * bytes; every 20 ms of the cart's clock the player is stepped and the
 * setpoints written out; reports and gap reports go back on stdout. It is
 * the cart-side API only: player (with its receiver and plan decoder).
 * SPDX-License-Identifier: MIT */
#include <stdio.h>
#include <string.h>
#include <veer/player.h>

static double memory[(1u << 20) / sizeof(double)]; /* the player's memory; veer_player_size() must fit */

int main(void) {
    veer_player_def def = veer_default_player_def();
    def.link.cart = 7;
    for (int i = 0; i < VEER_LINK_KEY_BYTES; i++) def.link.key[i] = (uint8_t)(0x61 + 5 * i);
    def.drive = veer_default_drive_def(VEER_DRIVE_STEERED);
    def.limits = veer_default_limits();
    for (int i = 0; i < 4; i++) {
        def.limits.modules[i].wheel_rate = 25.0;
        def.limits.modules[i].wheel_accel = 30.0;
        def.limits.modules[i].steer_rate = 4.0;
    }
    if (veer_player_size() > sizeof memory) return 1;
    veer_player *pl = NULL;
    veer_diag diag;
    if (veer_player_init(memory, sizeof memory, &def, &pl, &diag) != VEER_OK) {
        fprintf(stderr, "%s\n", diag.message);
        return 1;
    }
    uint8_t frame[VEER_LINK_FRAME_MAX], out[VEER_LINK_FRAME_MAX];
    double now = 0.0;
    int c0, c1;
    while ((c0 = getchar()) != EOF && (c1 = getchar()) != EOF) {
        size_t n = (size_t)c0 | (size_t)c1 << 8;
        if (n > sizeof frame || fread(frame, 1, n, stdin) != n) break;
        veer_player_event ev;
        if (veer_player_frame(pl, frame, n, now, &ev) != VEER_OK) return 1;
        size_t m = 0;
        if (ev.report_due && veer_player_report_frame(pl, out, sizeof out, &m) == VEER_OK) fwrite(out, 1, m, stdout);
        if (ev.link.gaps_due && veer_player_gap_frame(pl, out, sizeof out, &m) == VEER_OK) fwrite(out, 1, m, stdout);
        now += 0.02;
        veer_sample s;
        if (veer_player_step(pl, now, &s) != VEER_OK) return 1;
        for (int i = 0; i < s.module_count; i++) printf("%.4f %.4f\n", s.modules[i].steer, s.modules[i].wheel_rate);
    }
    veer_link_report rep;
    if (veer_player_status(pl, &rep) != VEER_OK) return 1;
    printf("state %s\n", veer_player_state_name(rep.state));
    return 0;
}
