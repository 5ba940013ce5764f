/* libFuzzer target: the cart side of the radio link. The input is a script
 * of what comes off the air and what the cart's controller does, fed to a
 * player (player.h, which holds a receiver) and to a bare receiver
 * (link.h) side by side:
 *
 *   op 0  raw frame: any bytes, as received;
 *   op 1  a frame body of any bytes with its length prefix, CRC-32 and
 *         (optionally) frame tag made right, so that the fuzzer reaches
 *         the LinkFrame decoder and the command handling behind the checks;
 *   op 2  a sealed plan (correct plan tag), chunked by the ground side's
 *         sender and delivered in an order the input chooses, with drops,
 *         repeats and damaged chunks: one of two real plans for this cart,
 *         such a plan with a byte altered before sealing (authentic but
 *         wrong), or arbitrary bytes sealed as a plan (so the plan decoder
 *         gets fuzzed bytes through the whole link);
 *   op 3  a command frame (heartbeat, start, stop, or an unknown kind);
 *   op 4  control ticks at 50 Hz, op 5 a jump in time;
 *   op 6  a local stop; op 7 the cart's reports, parsed by the ground side.
 *
 * The first byte picks the frame size and the cart: one that takes any
 * plan, or one sized for the two real plans (veer_plan_needs_pb), which
 * refuses larger ones (reason CAPACITY) from a ground station that sends
 * them anyway.
 *
 * The tags are made with the cart's key, as the ground station would, so
 * no check is bypassed. Findings: a crash, a sanitizer report, any
 * allocation by the player or the receiver, a status other than OK for a
 * frame, a reason or state outside its table, a non-finite setpoint,
 * wheels turning while the player is not running or stopping, a player
 * FAULT, counters going backwards, or a report the ground side cannot read.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include <pb_encode.h>
#include <veer/link.h>
#include <veer/player.h>
#include <veer/wire.h>
#include "fuzz_common.h"
#include "kestrel_demo.h"
#include "link_internal.h"

#define MAX_OPS 48
#define TICK 0.02 /* s: 50 Hz control rate */

static double player_mem[4 << 17]; /* 4 MiB, aligned for double; checked against veer_player_size() */
static double rx_mem[(VEER_LINK_MAX_PLAN_BYTES + 4096) / sizeof(double)]; /* checked against veer_link_receiver_size() */
static uint8_t plans[2][VEER_LINK_MAX_PLAN_BYTES];
static size_t plan_size[2];
static uint8_t scratch[VEER_LINK_MAX_PLAN_BYTES];
static veer_player_def cart, cart_any, cart_fit;
static veer_link_def ground; /* the ground station's view of the link: it does not know the cart's capacity */

/* Two real plans for the cart: the demo route and a short spin. */
static void make_plans(void) {
    veer_drive_def d;
    veer_limits l;
    veer_route r;
    if (kestrel_demo(&d, &l, &r) != VEER_OK) FUZZ_FAIL("demo scenario does not build");
    cart = veer_default_player_def();
    cart.link.cart = 41;
    for (int i = 0; i < VEER_LINK_KEY_BYTES; i++) cart.link.key[i] = (uint8_t)(0xa5 ^ (7 * i + 3));
    cart.drive = d;
    cart.limits = l;
    cart.link_timeout = 1.0;
    veer_route spin = veer_default_route(r.start_x, r.start_y, r.start_yaw);
    veer_leg leg = veer_default_leg(VEER_LEG_SPIN);
    leg.yaw = r.start_yaw + 1.0;
    if (veer_route_add_leg(&spin, &leg) != VEER_OK) FUZZ_FAIL("spin route");
    const veer_route *routes[2] = {&r, &spin};
    veer_plan_options o = veer_default_plan_options();
    o.grid_points = 400;
    for (int k = 0; k < 2; k++) {
        veer_plan *p = NULL;
        veer_diag diag;
        if (veer_plan_create(&d, &l, routes[k], &o, &p, &diag) != VEER_OK) FUZZ_FAIL("plan %d: %s", k, diag.message);
        if (veer_plan_encode_pb(p, plans[k], sizeof plans[k], &plan_size[k], &diag) != VEER_OK)
            FUZZ_FAIL("encode %d: %s", k, diag.message);
        veer_plan_destroy(p);
    }
    cart_any = cart_fit = cart;
    cart_fit.link.max_plan_bytes = VEER_LINK_MIN_PLAN_BYTES;
    cart_fit.max_knots = cart_fit.max_waypoints = cart_fit.max_legs = 1;
    for (int k = 0; k < 2; k++) {
        veer_plan_needs n;
        veer_diag diag;
        if (veer_plan_needs_pb(plans[k], plan_size[k], &n, &diag) != VEER_OK) FUZZ_FAIL("needs %d: %s", k, diag.message);
        if (n.plan_bytes > cart_fit.link.max_plan_bytes) cart_fit.link.max_plan_bytes = n.plan_bytes;
        if (n.knots > cart_fit.max_knots) cart_fit.max_knots = n.knots;
        if (n.waypoints > cart_fit.max_waypoints) cart_fit.max_waypoints = n.waypoints;
        if (n.legs > cart_fit.max_legs) cart_fit.max_legs = n.legs;
    }
}

int LLVMFuzzerInitialize(int *argc, char ***argv);
int LLVMFuzzerInitialize(int *argc, char ***argv) {
    (void)argc;
    (void)argv;
    fuzz_install_allocator();
    if (veer_player_size() > sizeof player_mem) FUZZ_FAIL("player needs %zu bytes", veer_player_size());
    if (veer_link_receiver_size() > sizeof rx_mem) FUZZ_FAIL("receiver needs %zu bytes", veer_link_receiver_size());
    make_plans();
    return 0;
}

typedef struct {
    veer_player *player;
    veer_link_receiver *rx;
    double now;
    uint64_t plan_id, seq; /* the last ones sent */
    uint64_t accepted, command_seq;
    int state;
    double steer[VEER_MAX_MODULES];
} run;

static void check_reason(int reason, const char *what) {
    FUZZ_CHECK(reason >= 0 && reason < VEER_LINK_REASON_COUNT && strcmp(veer_link_reason_name(reason), "UNKNOWN"),
               "%s: reason %d outside the table", what, reason);
}

static void check_player(run *u) {
    veer_link_report rep;
    FUZZ_CHECK(veer_player_status(u->player, &rep) == VEER_OK, "veer_player_status failed");
    FUZZ_CHECK(rep.state >= VEER_PLAYER_IDLE && rep.state <= VEER_PLAYER_FAULT, "player state %d", rep.state);
    FUZZ_CHECK(rep.state != VEER_PLAYER_FAULT, "the player faulted on an authentic plan");
    FUZZ_CHECK(rep.accepted_plan_id >= u->accepted, "accepted plan counter went back");
    FUZZ_CHECK(rep.command_seq >= u->command_seq, "command sequence went back");
    FUZZ_CHECK(isfinite(rep.t) && isfinite(rep.s) && isfinite(rep.sdot) && fuzz_finite3(rep.pose), "report values");
    u->accepted = rep.accepted_plan_id;
    u->command_seq = rep.command_seq;
    u->state = rep.state;
}

/* One frame off the air, to the player and to the bare receiver. */
static void deliver(run *u, const uint8_t *frame, size_t size) {
    veer_player_event pev;
    fuzz_cart_side = 1;
    veer_status st = veer_player_frame(u->player, frame, size, u->now, &pev);
    FUZZ_CHECK(st == VEER_OK, "veer_player_frame: %s", veer_status_name(st));
    check_reason(pev.reason, "player");
    check_reason(pev.link.reason, "player link");
    veer_link_event ev;
    st = veer_link_receive(u->rx, frame, size, &ev);
    FUZZ_CHECK(st == VEER_OK, "veer_link_receive: %s", veer_status_name(st));
    check_reason(ev.reason, "receiver");
    FUZZ_CHECK(ev.kind == pev.link.kind && ev.reason == pev.link.reason,
               "receiver and player's receiver disagree: kind %d/%d, reason %s/%s", ev.kind, pev.link.kind,
               veer_link_reason_name(ev.reason), veer_link_reason_name(pev.link.reason));
    if (ev.plan_ready) {
        const uint8_t *pb = NULL;
        size_t pn = 0;
        uint64_t id = 0;
        FUZZ_CHECK(veer_link_receiver_plan(u->rx, &pb, &pn, &id) == VEER_OK && pb && pn <= VEER_LINK_MAX_PLAN_BYTES,
                   "ready plan not readable");
        /* Settled as the player settled its own copy, so that the two stay in step. */
        FUZZ_CHECK(pev.link.plan_ready, "the bare receiver completed a plan, the player's did not");
        int verdict = pev.reason;
        FUZZ_CHECK(verdict != VEER_LINK_NONE || pev.armed, "the player took a plan without arming it");
        FUZZ_CHECK(veer_link_receiver_settle(u->rx, verdict) == VEER_OK, "settle");
        FUZZ_CHECK(veer_link_receiver_settle(u->rx, verdict) == VEER_ERR_STATE, "settled twice");
    }
    fuzz_cart_side = 0;
    check_player(u);
}

static void ticks(run *u, int n) {
    for (int k = 0; k < n; k++) {
        u->now += TICK;
        veer_sample s;
        fuzz_cart_side = 1;
        veer_status st = veer_player_step(u->player, u->now, &s);
        fuzz_cart_side = 0;
        FUZZ_CHECK(st == VEER_OK, "veer_player_step: %s", veer_status_name(st));
        FUZZ_CHECK(fuzz_sample_finite(&s), "non-finite setpoint at %g s", u->now);
        check_player(u);
        if (u->state != VEER_PLAYER_RUNNING && u->state != VEER_PLAYER_STOPPING)
            for (int i = 0; i < s.module_count; i++)
                FUZZ_CHECK(s.modules[i].wheel_rate == 0.0 && s.modules[i].wheel_accel == 0.0,
                           "module %d turns (%g rad/s) in state %s", i, s.modules[i].wheel_rate,
                           veer_player_state_name(u->state));
    }
    /* Time may not go backwards: refused, nothing changes. */
    veer_sample s;
    fuzz_cart_side = 1;
    veer_status st = veer_player_step(u->player, u->now - 1.0, &s);
    fuzz_cart_side = 0;
    FUZZ_CHECK(st == VEER_ERR_VALUE, "a step back in time gave %s", veer_status_name(st));
}

static void put_crc(uint8_t *p, uint32_t c) {
    for (int k = 0; k < 4; k++) p[k] = (uint8_t)(c >> (8 * k));
}

/* Length prefix, body, optional frame tag over the body, CRC-32. */
static size_t frame_up(const uint8_t *body, size_t n, int tagged, uint8_t *out) {
    size_t total = n + (tagged ? VEER__LINK_TAG_FIELD_BYTES : 0), h = 0;
    out[h++] = (uint8_t)(total < 0x80 ? total : (total & 0x7f) | 0x80);
    if (total >= 0x80) out[h++] = (uint8_t)(total >> 7);
    memcpy(out + h, body, n);
    if (tagged) {
        uint8_t tag[VEER_LINK_FRAME_TAG_BYTES];
        veer__link_frame_tag(cart.link.key, body, n, tag);
        out[h + n] = (uint8_t)(15u << 3 | 2u);
        out[h + n + 1] = VEER_LINK_FRAME_TAG_BYTES;
        memcpy(out + h + n + 2, tag, VEER_LINK_FRAME_TAG_BYTES);
    }
    put_crc(out + h + total, veer_link_crc32(0, out, h + total));
    return h + total + 4;
}

static void send_plan(run *u, fuzz_reader *r) {
    unsigned what = fuzz_u8(r);
    const uint8_t *plan;
    size_t n;
    switch (what % 4) {
    case 0:
    case 1:
        plan = plans[what % 2];
        n = plan_size[what % 2];
        break;
    case 2: { /* a real plan with one byte altered before sealing */
        memcpy(scratch, plans[0], plan_size[0]);
        n = plan_size[0];
        scratch[fuzz_u16(r) % n] ^= (uint8_t)(fuzz_u8(r) | 1u);
        plan = scratch;
        break;
    }
    default: /* fuzzed bytes sealed as a plan */
        plan = fuzz_bytes(r, fuzz_u16(r) % 4096u, &n);
        if (n == 0) return;
        break;
    }
    unsigned id_step = fuzz_u8(r);
    uint64_t id = id_step < 250 ? u->plan_id + 1 + id_step % 3 : (id_step == 250 ? u->plan_id : (uint64_t)id_step - 250);
    veer_link_sender *tx = NULL;
    veer_diag d;
    if (veer_link_sender_create(&ground, id, plan, n, &tx, &d) != VEER_OK) return;
    u->plan_id = id;
    int count = veer_link_sender_chunk_count(tx);
    FUZZ_CHECK(count >= 1 && count <= VEER_LINK_MAX_CHUNKS, "chunk count %d", count);
    unsigned order = fuzz_u8(r), damage = fuzz_u8(r);
    int rounds = 1 + (order >> 6); /* repeats: 1..4 passes over the chunks */
    for (int pass = 0; pass < rounds; pass++)
        for (int c = 0; c < count; c++) {
            int k = (order & 1) ? count - 1 - c : c;
            if ((order & 2) && pass == 0 && c % 3 == 1) continue; /* dropped on the first pass */
            if ((order & 4) && c % 2 == 0) k = (int)(fuzz_u8(r) % (unsigned)count);
            uint8_t frame[VEER_LINK_FRAME_MAX];
            size_t fn = 0;
            FUZZ_CHECK(veer_link_sender_frame(tx, k, frame, sizeof frame, &fn) == VEER_OK && fn > 4, "sender frame");
            if (damage && (unsigned)c % 8 == damage % 8 && pass == 0) {
                frame[fuzz_u16(r) % fn] ^= (uint8_t)(damage | 1u);
                if (damage & 0x80) put_crc(frame + fn - 4, veer_link_crc32(0, frame, fn - 4));
            }
            deliver(u, frame, fn);
            if ((order & 8) && c % 4 == 3) ticks(u, 1);
        }
    veer_link_sender_destroy(tx);
}

static void send_command(run *u, fuzz_reader *r) {
    unsigned how = fuzz_u8(r);
    uint64_t seq = how < 240 ? u->seq + 1 : (how < 250 ? u->seq : (uint64_t)(how - 249));
    int kind = (int)(fuzz_u8(r) % 5); /* 0 and 4 are unknown kinds */
    uint64_t id = (how & 1) ? u->plan_id : fuzz_u8(r);
    uint8_t frame[VEER_LINK_FRAME_MAX];
    size_t fn = 0;
    if (veer_link_command_frame(&cart.link, seq, kind, kind == VEER_LINK_COMMAND_START ? id : 0, frame, sizeof frame,
                                &fn) != VEER_OK) {
        /* The ground side refuses unknown kinds: build the body by hand. */
        veer_v1_LinkFrame f;
        memset(&f, 0, sizeof f);
        f.cart = cart.link.cart;
        f.which_body = veer_v1_LinkFrame_command_tag;
        f.body.command.seq = seq;
        f.body.command.kind = (veer_v1_CommandKind)kind;
        f.body.command.plan_id = id;
        uint8_t body[VEER_LINK_FRAME_MAX];
        pb_ostream_t os = pb_ostream_from_buffer(body, sizeof body);
        if (!pb_encode(&os, veer_v1_LinkFrame_fields, &f)) return;
        fn = frame_up(body, os.bytes_written, 1, frame);
    }
    u->seq = seq > u->seq ? seq : u->seq;
    deliver(u, frame, fn);
}

static void reports(run *u) {
    uint8_t frame[VEER_LINK_FRAME_MAX];
    size_t fn = 0;
    veer_link_message m;
    int reason = -1;
    fuzz_cart_side = 1;
    veer_status st = veer_player_report_frame(u->player, frame, sizeof frame, &fn);
    fuzz_cart_side = 0;
    FUZZ_CHECK(st == VEER_OK, "report frame: %s", veer_status_name(st));
    FUZZ_CHECK(veer_link_parse(&cart.link, frame, fn, &m, &reason) == VEER_OK && m.kind == VEER_LINK_KIND_REPORT,
               "the ground side cannot read a report: %s", veer_link_reason_name(reason));
    fuzz_cart_side = 1;
    st = veer_player_gap_frame(u->player, frame, sizeof frame, &fn);
    fuzz_cart_side = 0;
    FUZZ_CHECK(st == VEER_OK, "gap frame: %s", veer_status_name(st));
    FUZZ_CHECK(veer_link_parse(&cart.link, frame, fn, &m, &reason) == VEER_OK && m.kind == VEER_LINK_KIND_GAPS,
               "the ground side cannot read a gap report: %s", veer_link_reason_name(reason));
    veer_link_gaps g;
    fuzz_cart_side = 1;
    st = veer_link_receiver_gaps(u->rx, &g);
    fuzz_cart_side = 0;
    FUZZ_CHECK(st == VEER_OK && g.bits <= VEER_LINK_MAX_CHUNKS && g.missing_count <= VEER_LINK_MAX_CHUNKS, "gaps");
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    fuzz_reader r = {data, size, 0};
    static const int frame_sizes[4] = {VEER_LINK_FRAME_DEFAULT, VEER_LINK_FRAME_MIN, (VEER_LINK_FRAME_MIN + VEER_LINK_FRAME_DEFAULT) / 2,
                                       VEER_LINK_FRAME_MAX};
    unsigned pick = fuzz_u8(&r);
    cart = (pick >> 2) & 1 ? cart_fit : cart_any;
    cart.link.frame_size = frame_sizes[pick % 4];
    ground = cart.link;
    ground.max_plan_bytes = 0;
    run u;
    memset(&u, 0, sizeof u);
    veer_diag d;
    fuzz_cart_side = 1;
    if (veer_player_init(player_mem, sizeof player_mem, &cart, &u.player, &d) != VEER_OK)
        FUZZ_FAIL("player init: %s", d.message);
    if (veer_link_receiver_init(rx_mem, sizeof rx_mem, &cart.link, 0, 0, &u.rx, &d) != VEER_OK)
        FUZZ_FAIL("receiver init: %s", d.message);
    fuzz_cart_side = 0;
    for (int op = 0; op < MAX_OPS && r.i < r.n; op++) {
        unsigned kind = fuzz_u8(&r);
        switch (kind % 8) {
        case 0: {
            size_t n;
            const uint8_t *b = fuzz_bytes(&r, fuzz_u16(&r) % (VEER_LINK_FRAME_MAX + 16u), &n);
            deliver(&u, b, n);
            break;
        }
        case 1: {
            size_t n;
            const uint8_t *b = fuzz_bytes(&r, fuzz_u16(&r) % (unsigned)(cart.link.frame_size - 6), &n);
            uint8_t frame[VEER_LINK_FRAME_MAX + 64];
            size_t fn = frame_up(b, n, (kind >> 3) & 1, frame);
            deliver(&u, frame, fn);
            break;
        }
        case 2: send_plan(&u, &r); break;
        case 3: send_command(&u, &r); break;
        case 4: ticks(&u, 1 + (int)(fuzz_u8(&r) % 64)); break;
        case 5: u.now += fuzz_u16(&r) * 1e-3; ticks(&u, 1); break;
        case 6: {
            fuzz_cart_side = 1;
            veer_status st = veer_player_stop(u.player, u.now);
            fuzz_cart_side = 0;
            FUZZ_CHECK(st == VEER_OK || st == VEER_ERR_STATE, "veer_player_stop: %s", veer_status_name(st));
            check_player(&u);
            break;
        }
        default: reports(&u); break;
        }
    }
    FUZZ_CHECK(fuzz_heap_bytes == 0, "%zu bytes left on the heap", fuzz_heap_bytes);
    return 0;
}
