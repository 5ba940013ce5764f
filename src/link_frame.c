/* Frames on the air (proto/veer/v1/link.proto): length, LinkFrame encoding,
 * CRC-32. The ground side's sender (sealed plan cut into chunks), command
 * frames and the parser of what a cart sends back; the cart side's gap
 * report and player report frames.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include <pb_decode.h>
#include <pb_encode.h>
#include "link_internal.h"

#define LINK_FAIL(diag, status, ...) veer__fail_plain((diag), (status), __VA_ARGS__)

/* The largest report frame (length prefix, cart, report, tag, CRC) fits
 * the smallest frame size; gap reports shrink their bitmap to fit. */
_Static_assert(2 + 6 + 3 + veer_v1_PlayerReport_size + VEER__LINK_TAG_FIELD_BYTES + 4 <= VEER_LINK_FRAME_MIN,
               "a player report must fit VEER_LINK_FRAME_MIN");

/* ---- reasons ------------------------------------------------------------ */

const char *veer_link_reason_name(int reason) {
    switch (reason) {
#define VEER_LINK_REASON_NAME_(name, value, text) \
    case value:                                   \
        return #name;
        VEER_LINK_REASON_TABLE(VEER_LINK_REASON_NAME_)
#undef VEER_LINK_REASON_NAME_
    default:
        return "UNKNOWN";
    }
}

const char *veer_link_reason_str(int reason) {
    switch (reason) {
#define VEER_LINK_REASON_STR_(name, value, text) \
    case value:                                  \
        return text;
        VEER_LINK_REASON_TABLE(VEER_LINK_REASON_STR_)
#undef VEER_LINK_REASON_STR_
    default:
        return "unknown reason";
    }
}

/* ---- definition --------------------------------------------------------- */

veer_link_def veer_default_link_def(void) {
    veer_link_def d;
    memset(&d, 0, sizeof d);
    d.frame_size = VEER_LINK_FRAME_DEFAULT;
    return d;
}

veer_status veer_link_def_check(const veer_link_def *def, veer_diag *diag) {
    if (!def) return LINK_FAIL(diag, VEER_ERR_NULL, "link definition is NULL");
    if (def->frame_size < VEER_LINK_FRAME_MIN || def->frame_size > VEER_LINK_FRAME_MAX)
        return LINK_FAIL(diag, VEER_ERR_VALUE, "link frame_size %d is outside %d..%d bytes", def->frame_size,
                         VEER_LINK_FRAME_MIN, VEER_LINK_FRAME_MAX);
    uint8_t any = 0;
    for (int i = 0; i < VEER_LINK_KEY_BYTES; i++) any |= def->key[i];
    if (!any) return LINK_FAIL(diag, VEER_ERR_VALUE, "link key is all zero: set the cart's pre-shared key");
    if (!veer__link_max_plan_ok(def->max_plan_bytes))
        return LINK_FAIL(diag, VEER_ERR_VALUE, "link max_plan_bytes %u is outside %d..%d bytes (0: the largest)",
                         (unsigned)def->max_plan_bytes, VEER_LINK_MIN_PLAN_BYTES, VEER_LINK_MAX_PLAN_BYTES);
    veer__diag_ok(diag);
    return VEER_OK;
}

/* ---- chunking ----------------------------------------------------------- */

static size_t varint_size(uint64_t v) {
    size_t n = 1;
    while (v >= 0x80u) v >>= 7, n++;
    return n;
}

/* A field with a varint value, left out when zero (proto3). */
static size_t varint_field(uint64_t v) { return v ? 1 + varint_size(v) : 0; }

/* Frame size of chunk index with `data` bytes: length prefix, LinkFrame
 * encoding as nanopb writes it, CRC. */
static size_t chunk_frame_size(uint32_t cart, uint64_t plan_id, uint32_t index, uint32_t count, uint32_t sealed,
                               uint32_t data) {
    size_t chunk = varint_field(plan_id) + varint_field(index) + varint_field(count) + varint_field(sealed) +
                   (data ? 1 + varint_size(data) + data : 0);
    size_t body = varint_field(cart) + 1 + varint_size(chunk) + chunk;
    return varint_size(body) + body + 4;
}

uint32_t veer__link_chunk_bytes(uint32_t count, uint32_t sealed) {
    if (count == 0 || sealed == 0 || count > sealed) return 0;
    uint32_t d = (uint32_t)(((uint64_t)sealed + count - 1) / count);
    /* The pair must be what the sender makes: count = ceil(sealed / d). */
    if ((uint32_t)(((uint64_t)sealed + d - 1) / d) != count) return 0;
    return d;
}

uint32_t veer__link_chunk_length(uint32_t index, uint32_t count, uint32_t sealed) {
    uint32_t d = veer__link_chunk_bytes(count, sealed);
    if (!d || index >= count) return 0;
    uint64_t off = (uint64_t)index * d;
    return (uint32_t)((uint64_t)sealed - off < d ? (uint64_t)sealed - off : d);
}

int veer__link_chunking(uint32_t cart, uint64_t plan_id, uint32_t sealed, int frame_size, uint32_t *count,
                        uint32_t *chunk_bytes) {
    if (sealed == 0 || frame_size < VEER_LINK_FRAME_MIN || frame_size > VEER_LINK_FRAME_MAX) return 0;
    uint32_t n = 1;
    /* The header grows with the count's varints: iterate to the fixed point
     * (monotone, a few rounds). */
    for (int round = 0; round < 16; round++) {
        uint32_t dmax = 0;
        for (uint32_t d = (uint32_t)frame_size; d > 0; d--)
            if (chunk_frame_size(cart, plan_id, n - 1, n, sealed, d) <= (size_t)frame_size) {
                dmax = d;
                break;
            }
        if (dmax == 0) return 0;
        uint32_t need = (uint32_t)(((uint64_t)sealed + dmax - 1) / dmax);
        if (need <= n) break;
        n = need;
    }
    if (n > VEER_LINK_MAX_CHUNKS) return 0;
    uint32_t d = veer__link_chunk_bytes(n, sealed);
    if (!d) return 0;
    *count = n;
    *chunk_bytes = d;
    return 1;
}

/* ---- encoding and decoding ---------------------------------------------- */

static void put_crc(uint8_t *p, uint32_t crc) {
    for (int i = 0; i < 4; i++) p[i] = (uint8_t)(crc >> (8 * i));
}

/* The LinkFrame {cart, body} as nanopb's encoder writes it: cart (proto3)
 * left out when 0, the oneof's body always, the tag not (it is appended). */
static bool put_frame(pb_ostream_t *o, uint32_t cart, pb_size_t kind, const pb_msgdesc_t *fields, const void *msg) {
    return (cart == 0 || (pb_encode_tag(o, PB_WT_VARINT, veer_v1_LinkFrame_cart_tag) && pb_encode_varint(o, cart))) &&
           pb_encode_tag(o, PB_WT_STRING, kind) && pb_encode_submessage(o, fields, msg);
}

veer_status veer__link_encode(const veer_link_def *def, pb_size_t kind, const pb_msgdesc_t *fields, const void *msg,
                              int tagged, uint8_t *out, size_t capacity, size_t *size) {
    pb_ostream_t sz = PB_OSTREAM_SIZING;
    if (!put_frame(&sz, def->cart, kind, fields, msg)) return VEER_ERR_CAPACITY;
    size_t body = sz.bytes_written;
    if (tagged) body += VEER__LINK_TAG_FIELD_BYTES;
    size_t total = varint_size(body) + body + 4;
    *size = total;
    if (total > (size_t)def->frame_size) return VEER_ERR_CAPACITY;
    if (!out || capacity < total) return VEER_ERR_BUFFER;
    /* Written in place (no frame-sized copy on a cart's stack), never past
     * total bytes; only the two cannot-happen failures below leave a partial
     * frame in out. */
    pb_ostream_t os = pb_ostream_from_buffer(out, total);
    if (!pb_encode_varint(&os, body)) return VEER_ERR_CAPACITY;
    size_t head = os.bytes_written;
    if (!put_frame(&os, def->cart, kind, fields, msg)) return VEER_ERR_CAPACITY; /* sized above: cannot happen */
    size_t n = os.bytes_written;
    if (n + (tagged ? VEER__LINK_TAG_FIELD_BYTES : 0) + 4 != total)
        return VEER_ERR_CAPACITY; /* sizing and writing disagree: cannot happen */
    if (tagged) {
        uint8_t tag[VEER_LINK_FRAME_TAG_BYTES];
        veer__link_frame_tag(def->key, out + head, n - head, tag);
        out[n++] = (uint8_t)(veer_v1_LinkFrame_tag_tag << 3 | PB_WT_STRING);
        out[n++] = VEER_LINK_FRAME_TAG_BYTES;
        memcpy(out + n, tag, VEER_LINK_FRAME_TAG_BYTES);
        n += VEER_LINK_FRAME_TAG_BYTES;
    }
    put_crc(out + n, veer_link_crc32(0, out, n));
    return VEER_OK;
}

static int tagged_kind(pb_size_t which) {
    return which == veer_v1_LinkFrame_command_tag || which == veer_v1_LinkFrame_gaps_tag ||
           which == veer_v1_LinkFrame_report_tag;
}

/* Capacities of the generated struct's bytes fields (link.options). */
#define CHUNK_DATA_MAX (sizeof(((veer_v1_PlanChunk *)0)->data.bytes))
#define FRAME_TAG_MAX (sizeof(((veer_v1_LinkFrame *)0)->tag.bytes))

/* A uint32 field: nanopb refuses a varint that does not fit. */
static bool read_u32(pb_istream_t *s, pb_wire_type_t wt, uint32_t *v) {
    uint64_t u;
    if (wt != PB_WT_VARINT || !pb_decode_varint(s, &u) || u > UINT32_MAX) return false;
    *v = (uint32_t)u;
    return true;
}

/* A bytes field of at most cap bytes, left where it lies (*p: a buffer
 * stream reads from its state pointer on). */
static bool read_slice(pb_istream_t *s, pb_wire_type_t wt, size_t cap, const uint8_t **p, size_t *n) {
    uint32_t len;
    if (wt != PB_WT_STRING || !pb_decode_varint32(s, &len) || len > cap || len > s->bytes_left) return false;
    *p = (const uint8_t *)s->state;
    *n = len;
    return pb_read(s, NULL, len);
}

/* A PlanChunk submessage, merged into c as nanopb merges it. */
static bool read_chunk(pb_istream_t *s, pb_wire_type_t wt, veer__link_chunk *c) {
    pb_istream_t sub;
    if (wt != PB_WT_STRING || !pb_make_string_substream(s, &sub)) return false;
    bool ok = true;
    while (ok && sub.bytes_left) {
        pb_wire_type_t w;
        uint32_t tag;
        bool eof;
        if (!pb_decode_tag(&sub, &w, &tag, &eof)) {
            ok = eof;
            break;
        }
        switch (tag) {
        case 0: ok = false; break; /* zero tag */
        case veer_v1_PlanChunk_plan_id_tag: ok = w == PB_WT_VARINT && pb_decode_varint(&sub, &c->plan_id); break;
        case veer_v1_PlanChunk_index_tag: ok = read_u32(&sub, w, &c->index); break;
        case veer_v1_PlanChunk_count_tag: ok = read_u32(&sub, w, &c->count); break;
        case veer_v1_PlanChunk_sealed_size_tag: ok = read_u32(&sub, w, &c->sealed_size); break;
        case veer_v1_PlanChunk_data_tag: ok = read_slice(&sub, w, CHUNK_DATA_MAX, &c->data, &c->data_size); break;
        default: ok = pb_skip_field(&sub, w);
        }
    }
    return pb_close_string_substream(s, &sub) && ok;
}

/* One of the body's submessages decoded by nanopb into msg: zeroed first
 * when the body held another kind (a oneof starts over), else merged. */
static bool read_body(pb_istream_t *s, pb_wire_type_t wt, veer__link_frame *f, pb_size_t kind,
                      const pb_msgdesc_t *fields, void *msg, size_t msg_size) {
    if (f->which_body != kind) memset(msg, 0, msg_size);
    f->which_body = kind;
    if (kind == veer_v1_LinkFrame_chunk_tag) return read_chunk(s, wt, msg);
    pb_istream_t sub;
    if (wt != PB_WT_STRING || !pb_make_string_substream(s, &sub)) return false;
    bool ok = pb_decode_ex(&sub, fields, msg, PB_DECODE_NOINIT);
    return pb_close_string_substream(s, &sub) && ok;
}

/* A LinkFrame message's fields into f (zeroed first). */
static bool read_frame(pb_istream_t *s, veer__link_frame *f) {
    memset(f, 0, sizeof *f);
    while (s->bytes_left) {
        pb_wire_type_t wt;
        uint32_t tag;
        bool eof;
        if (!pb_decode_tag(s, &wt, &tag, &eof)) return eof;
        bool ok;
        switch (tag) {
        case 0: return false; /* zero tag */
        case veer_v1_LinkFrame_cart_tag: ok = read_u32(s, wt, &f->cart); break;
        case veer_v1_LinkFrame_chunk_tag:
            ok = read_body(s, wt, f, (pb_size_t)tag, NULL, &f->body.chunk, sizeof f->body.chunk);
            break;
        case veer_v1_LinkFrame_command_tag:
            ok = read_body(s, wt, f, (pb_size_t)tag, veer_v1_Command_fields, &f->body.command, sizeof f->body.command);
            break;
        case veer_v1_LinkFrame_gaps_tag:
            ok = read_body(s, wt, f, (pb_size_t)tag, veer_v1_GapReport_fields, &f->body.gaps, sizeof f->body.gaps);
            break;
        case veer_v1_LinkFrame_report_tag:
            ok = read_body(s, wt, f, (pb_size_t)tag, veer_v1_PlayerReport_fields, &f->body.report,
                           sizeof f->body.report);
            break;
        case veer_v1_LinkFrame_tag_tag: ok = read_slice(s, wt, FRAME_TAG_MAX, &f->tag, &f->tag_size); break;
        default: ok = pb_skip_field(s, wt);
        }
        if (!ok) return false;
    }
    return true;
}

int veer__link_decode(const veer_link_def *def, const uint8_t *bytes, size_t size, veer__link_frame *frame) {
    if (size > (size_t)def->frame_size) return VEER_LINK_FRAME_SIZE;
    if (!bytes || size < 1) return VEER_LINK_TRUNCATED;
    /* Length prefix: at most two bytes for frames of up to 1024 bytes. */
    uint64_t body = 0;
    size_t head = 0;
    for (int shift = 0;; shift += 7) {
        if (head >= size) return VEER_LINK_TRUNCATED;
        if (shift > 7) return VEER_LINK_MALFORMED;
        uint8_t b = bytes[head++];
        body |= (uint64_t)(b & 0x7Fu) << shift;
        if (!(b & 0x80u)) break;
    }
    if (body > (size_t)def->frame_size) return VEER_LINK_MALFORMED;
    size_t total = head + (size_t)body + 4;
    if (size < total) return VEER_LINK_TRUNCATED;
    if (size > total) return VEER_LINK_MALFORMED;
    uint32_t crc = (uint32_t)bytes[total - 4] | (uint32_t)bytes[total - 3] << 8 | (uint32_t)bytes[total - 2] << 16 |
                   (uint32_t)bytes[total - 1] << 24;
    if (veer_link_crc32(0, bytes, total - 4) != crc) return VEER_LINK_CRC;
    const uint8_t *b = bytes + head;
    pb_istream_t in = pb_istream_from_buffer(b, (size_t)body);
    if (!read_frame(&in, frame) || frame->which_body == 0) return VEER_LINK_MALFORMED;
    if (frame->cart != def->cart) return VEER_LINK_OTHER_CART;
    if (!tagged_kind(frame->which_body)) return frame->tag_size == 0 ? VEER_LINK_NONE : VEER_LINK_MALFORMED;
    /* The tag must be the encoding's last field, exactly once at the end. */
    size_t n = (size_t)body;
    if (frame->tag_size != VEER_LINK_FRAME_TAG_BYTES || n < VEER__LINK_TAG_FIELD_BYTES ||
        b[n - VEER__LINK_TAG_FIELD_BYTES] != (uint8_t)(veer_v1_LinkFrame_tag_tag << 3 | PB_WT_STRING) ||
        b[n - VEER__LINK_TAG_FIELD_BYTES + 1] != VEER_LINK_FRAME_TAG_BYTES ||
        memcmp(b + n - VEER_LINK_FRAME_TAG_BYTES, frame->tag, VEER_LINK_FRAME_TAG_BYTES) != 0)
        return VEER_LINK_FRAME_TAG;
    uint8_t tag[VEER_LINK_FRAME_TAG_BYTES];
    veer__link_frame_tag(def->key, b, n - VEER__LINK_TAG_FIELD_BYTES, tag);
    if (!veer__link_equal(tag, frame->tag, VEER_LINK_FRAME_TAG_BYTES)) return VEER_LINK_FRAME_TAG;
    return VEER_LINK_NONE;
}

/* ---- ground side: sender ------------------------------------------------ */

struct veer_link_sender {
    size_t alloc_size;
    veer_link_def def;
    uint64_t plan_id;
    uint32_t count, chunk_bytes, sealed;
    uint8_t tag[VEER_LINK_PLAN_TAG_BYTES];
    uint8_t data[]; /* sealed plan: Plan bytes, then the tag */
};

veer_status veer_link_sender_create(const veer_link_def *def, uint64_t plan_id, const uint8_t *plan,
                                    size_t plan_size, veer_link_sender **out, veer_diag *diag) {
    if (!out) return LINK_FAIL(diag, VEER_ERR_NULL, "out is NULL");
    *out = NULL;
    veer_status st = veer_link_def_check(def, diag);
    if (st != VEER_OK) return st;
    if (!plan) return LINK_FAIL(diag, VEER_ERR_NULL, "plan bytes are NULL");
    if (plan_size == 0 || plan_size > veer__link_max_plan(def))
        return LINK_FAIL(diag, VEER_ERR_CAPACITY, "plan of %zu bytes: the link carries 1..%u bytes%s", plan_size,
                         (unsigned)veer__link_max_plan(def), def->max_plan_bytes ? " (the cart's max_plan_bytes)" : "");
    if (plan_id == 0) return LINK_FAIL(diag, VEER_ERR_VALUE, "plan_id 0 is never accepted: counters start at 1");
    uint32_t sealed = (uint32_t)plan_size + VEER_LINK_PLAN_TAG_BYTES, count = 0, chunk = 0;
    if (!veer__link_chunking(def->cart, plan_id, sealed, def->frame_size, &count, &chunk))
        return LINK_FAIL(diag, VEER_ERR_CAPACITY, "a %u-byte sealed plan does not fit %d chunks of %d-byte frames",
                         (unsigned)sealed, VEER_LINK_MAX_CHUNKS, def->frame_size);
    size_t bytes = sizeof(veer_link_sender) + sealed;
    veer_link_sender *s = veer__alloc(bytes);
    if (!s) return LINK_FAIL(diag, VEER_ERR_NO_MEMORY, "out of memory");
    s->alloc_size = bytes;
    s->def = *def;
    s->plan_id = plan_id;
    s->count = count;
    s->chunk_bytes = chunk;
    s->sealed = sealed;
    memcpy(s->data, plan, plan_size);
    veer__link_plan_tag(def->key, def->cart, plan_id, plan, plan_size, s->tag);
    memcpy(s->data + plan_size, s->tag, VEER_LINK_PLAN_TAG_BYTES);
    *out = s;
    veer__diag_ok(diag);
    return VEER_OK;
}

void veer_link_sender_destroy(veer_link_sender *s) {
    if (!s) return;
    size_t bytes = s->alloc_size;
    memset(s, 0, bytes);
    veer__free(s, bytes);
}

int veer_link_sender_chunk_count(const veer_link_sender *s) { return s ? (int)s->count : 0; }

veer_status veer_link_sender_tag(const veer_link_sender *s, uint8_t tag[32]) {
    if (!s || !tag) return VEER_ERR_NULL;
    memcpy(tag, s->tag, VEER_LINK_PLAN_TAG_BYTES);
    return VEER_OK;
}

veer_status veer_link_sender_frame(const veer_link_sender *s, int index, uint8_t *out, size_t capacity,
                                   size_t *size) {
    if (!s || !size) return VEER_ERR_NULL;
    if (index < 0 || (uint32_t)index >= s->count) return VEER_ERR_VALUE;
    veer_v1_PlanChunk chunk;
    memset(&chunk, 0, sizeof chunk);
    veer_v1_PlanChunk *c = &chunk;
    c->plan_id = s->plan_id;
    c->index = (uint32_t)index;
    c->count = s->count;
    c->sealed_size = s->sealed;
    uint32_t len = veer__link_chunk_length((uint32_t)index, s->count, s->sealed);
    c->data.size = (pb_size_t)len;
    memcpy(c->data.bytes, s->data + (size_t)index * s->chunk_bytes, len);
    return veer__link_encode(&s->def, veer_v1_LinkFrame_chunk_tag, veer_v1_PlanChunk_fields, c, 0, out, capacity, size);
}

veer_status veer_link_command_frame(const veer_link_def *def, uint64_t seq, int kind, uint64_t plan_id, uint8_t *out,
                                    size_t capacity, size_t *size) {
    if (!def || !size) return VEER_ERR_NULL;
    if (veer_link_def_check(def, NULL) != VEER_OK || seq == 0 || kind < VEER_LINK_COMMAND_HEARTBEAT ||
        kind > VEER_LINK_COMMAND_STOP)
        return VEER_ERR_VALUE;
    veer_v1_Command c;
    memset(&c, 0, sizeof c);
    c.seq = seq;
    c.kind = (veer_v1_CommandKind)kind;
    c.plan_id = plan_id;
    return veer__link_encode(def, veer_v1_LinkFrame_command_tag, veer_v1_Command_fields, &c, 1, out, capacity, size);
}

/* ---- cart side: gap reports and player reports -------------------------- */

veer_status veer__link_gaps_frame(const veer_link_def *def, const veer_link_gaps *g, uint8_t *out, size_t capacity,
                                  size_t *size) {
    veer_v1_GapReport gaps;
    memset(&gaps, 0, sizeof gaps);
    veer_v1_GapReport *m = &gaps;
    m->plan_id = g->plan_id;
    m->count = g->count;
    m->base = g->base;
    m->missing_count = g->missing_count;
    m->complete = g->complete != 0;
    m->verdict = (veer_v1_LinkReason)g->verdict;
    size_t bytes = (g->bits + 7u) / 8u;
    if (bytes > sizeof m->missing.bytes) bytes = sizeof m->missing.bytes;
    /* As much of the bitmap as the frame holds. */
    for (;;) {
        m->missing.size = (pb_size_t)bytes;
        memcpy(m->missing.bytes, g->missing, bytes);
        if (bytes > 0 && g->bits < bytes * 8u) /* clear bits past the described ones */
            m->missing.bytes[bytes - 1] &= (uint8_t)((1u << (g->bits - (bytes - 1) * 8u)) - 1u);
        veer_status st = veer__link_encode(def, veer_v1_LinkFrame_gaps_tag, veer_v1_GapReport_fields, m, 1, out, capacity, size);
        if (st != VEER_ERR_CAPACITY || bytes == 0) return st;
        size_t over = *size - (size_t)def->frame_size;
        bytes = over >= bytes ? 0 : bytes - (over > 0 ? over : 1);
    }
}

void veer__link_report_to_pb(const veer_link_report *r, veer_v1_PlayerReport *m) {
    memset(m, 0, sizeof *m);
    m->state = (veer_v1_PlayerState)r->state;
    m->plan_id = r->plan_id;
    m->t = r->t;
    m->s = r->s;
    m->sdot = r->sdot;
    m->leg = r->leg;
    m->stop_reason = (veer_v1_StopReason)r->stop_reason;
    m->last_rejection = (veer_v1_LinkReason)r->last_rejection;
    m->accepted_plan_id = r->accepted_plan_id;
    m->command_seq = r->command_seq;
    m->x = r->pose[0];
    m->y = r->pose[1];
    m->yaw = r->pose[2];
    m->report_seq = r->report_seq;
}

veer_status veer__link_report_frame(const veer_link_def *def, const veer_link_report *r, uint8_t *out,
                                    size_t capacity, size_t *size) {
    veer_v1_PlayerReport m;
    veer__link_report_to_pb(r, &m);
    return veer__link_encode(def, veer_v1_LinkFrame_report_tag, veer_v1_PlayerReport_fields, &m, 1, out, capacity, size);
}

/* ---- ground side: parsing ----------------------------------------------- */

static int finite3(double a, double b, double c) { return isfinite(a) && isfinite(b) && isfinite(c); }

veer_status veer_link_parse(const veer_link_def *def, const uint8_t *frame, size_t size, veer_link_message *out,
                            int *reason) {
    if (reason) *reason = VEER_LINK_MALFORMED;
    if (!def || !out || (!frame && size)) return VEER_ERR_NULL;
    if (veer_link_def_check(def, NULL) != VEER_OK) return VEER_ERR_VALUE;
    veer__link_frame f;
    int why = veer__link_decode(def, frame, size, &f);
    veer_link_message m;
    memset(&m, 0, sizeof m);
    m.cart = f.cart;
    if (why == VEER_LINK_NONE) switch (f.which_body) {
        case veer_v1_LinkFrame_chunk_tag: {
            const veer__link_chunk *c = &f.body.chunk;
            m.kind = VEER_LINK_KIND_CHUNK;
            m.plan_id = c->plan_id;
            m.chunk_index = c->index;
            m.chunk_count = c->count;
            m.sealed_size = c->sealed_size;
            m.data_size = (uint32_t)c->data_size;
            break;
        }
        case veer_v1_LinkFrame_command_tag:
            m.kind = VEER_LINK_KIND_COMMAND;
            m.seq = f.body.command.seq;
            m.command = (int)f.body.command.kind;
            m.plan_id = f.body.command.plan_id;
            break;
        case veer_v1_LinkFrame_gaps_tag: {
            const veer_v1_GapReport *g = &f.body.gaps;
            m.kind = VEER_LINK_KIND_GAPS;
            m.gaps.plan_id = g->plan_id;
            m.gaps.count = g->count;
            m.gaps.base = g->base;
            m.gaps.bits = (uint32_t)g->missing.size * 8u;
            memcpy(m.gaps.missing, g->missing.bytes, g->missing.size);
            m.gaps.missing_count = g->missing_count;
            m.gaps.complete = g->complete;
            m.gaps.verdict = (int)g->verdict;
            if (g->count > VEER_LINK_MAX_CHUNKS || g->base > g->count || g->missing_count > g->count)
                why = VEER_LINK_CHUNK_RANGE;
            break;
        }
        case veer_v1_LinkFrame_report_tag: {
            const veer_v1_PlayerReport *r = &f.body.report;
            m.kind = VEER_LINK_KIND_REPORT;
            veer_link_report *o = &m.report;
            o->state = (int)r->state;
            o->plan_id = r->plan_id;
            o->t = r->t;
            o->s = r->s;
            o->sdot = r->sdot;
            o->leg = r->leg;
            o->stop_reason = (int)r->stop_reason;
            o->last_rejection = (int)r->last_rejection;
            o->accepted_plan_id = r->accepted_plan_id;
            o->command_seq = r->command_seq;
            o->pose[0] = r->x;
            o->pose[1] = r->y;
            o->pose[2] = r->yaw;
            o->report_seq = r->report_seq;
            if (!finite3(r->t, r->s, r->sdot) || !finite3(r->x, r->y, r->yaw)) why = VEER_LINK_MALFORMED;
            break;
        }
        default:
            why = VEER_LINK_MALFORMED;
        }
    if (reason) *reason = why;
    if (why != VEER_LINK_NONE) return VEER_ERR_DECODE;
    *out = m;
    return VEER_OK;
}
