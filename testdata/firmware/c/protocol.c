/*
 * protocol.c - the gaitrig wire protocol in portable C99, written from
 * docs/protocol.md. See protocol.h for the interface.
 */
#include "protocol.h"

#include <float.h>
#include <string.h>

/* The float packing below copies the bits of a float into a uint32_t, which
 * is only the IEEE-754 binary32 wire format if the host float is binary32.
 * Refuse to build anywhere else instead of sending wrong bytes. */
#if FLT_RADIX != 2 || FLT_MANT_DIG != 24 || FLT_MAX_EXP != 128
#error "protocol.c needs IEEE-754 binary32 float"
#endif
typedef char proto_float_is_4_bytes[(sizeof(float) == 4) ? 1 : -1];

/* ---- CRC-16/CCITT-FALSE ------------------------------------------------ */

uint16_t proto_crc16(const uint8_t *data, size_t n)
{
    /* Bitwise form: small and obviously the catalogue definition; a frame is
     * under 300 bytes, so a table buys nothing worth its 512 bytes of flash. */
    uint16_t crc = 0xFFFFu;
    size_t i;
    int bit;
    for (i = 0; i < n; i++) {
        crc ^= (uint16_t)((uint16_t)data[i] << 8);
        for (bit = 0; bit < 8; bit++) {
            if (crc & 0x8000u) {
                crc = (uint16_t)((crc << 1) ^ 0x1021u);
            } else {
                crc = (uint16_t)(crc << 1);
            }
        }
    }
    return crc;
}

/* ---- COBS (Cheshire and Baker, 1999) ----------------------------------- */

size_t proto_cobs_encode(const uint8_t *src, size_t n, uint8_t *dst, size_t dst_cap)
{
    size_t out = 1;      /* next free byte in dst; dst[0] is the first code */
    size_t code_at = 0;  /* where the current block's code byte goes */
    uint8_t code = 1;    /* distance to the next zero, counting the code byte */
    size_t i;

    if (dst_cap < 1) {
        return 0;
    }
    for (i = 0; i < n; i++) {
        if (src[i] == 0) {
            dst[code_at] = code;
            code_at = out++;
            code = 1;
            if (out > dst_cap) {
                return 0;
            }
            continue;
        }
        if (out >= dst_cap) {
            return 0;
        }
        dst[out++] = src[i];
        code++;
        /* A block of 254 non-zero bytes is full: close it with code 0xFF,
         * which means "no zero follows", and start a new block - unless the
         * input ends here, where the next block would be empty and the
         * canonical encoding stops. */
        if (code == 0xFF && i + 1 < n) {
            dst[code_at] = code;
            code_at = out++;
            code = 1;
            if (out > dst_cap) {
                return 0;
            }
        }
    }
    dst[code_at] = code;
    return out;
}

int proto_cobs_decode(const uint8_t *src, size_t n, uint8_t *dst, size_t dst_cap,
                      size_t *out_len)
{
    size_t in = 0;
    size_t out = 0;

    *out_len = 0;
    if (n == 0) {
        return PROTO_COBS_EMPTY;
    }
    while (in < n) {
        uint8_t code = src[in++];
        uint8_t k;
        if (code == 0) {
            return PROTO_COBS_ZERO;
        }
        for (k = 1; k < code; k++) {
            if (in >= n) {
                return PROTO_COBS_SHORT;
            }
            if (src[in] == 0) {
                return PROTO_COBS_ZERO;
            }
            if (out >= dst_cap) {
                return PROTO_COBS_OVERFLOW;
            }
            dst[out++] = src[in++];
        }
        /* Every block but a full one (0xFF) stands for its data plus one
         * zero; the zero after the last block is the delimiter, not data. */
        if (code != 0xFF && in < n) {
            if (out >= dst_cap) {
                return PROTO_COBS_OVERFLOW;
            }
            dst[out++] = 0;
        }
    }
    *out_len = out;
    return PROTO_COBS_OK;
}

/* ---- little-endian packing ---------------------------------------------- */

void proto_put_u16(uint8_t *p, uint16_t v)
{
    p[0] = (uint8_t)(v & 0xFFu);
    p[1] = (uint8_t)((v >> 8) & 0xFFu);
}

void proto_put_u32(uint8_t *p, uint32_t v)
{
    p[0] = (uint8_t)(v & 0xFFu);
    p[1] = (uint8_t)((v >> 8) & 0xFFu);
    p[2] = (uint8_t)((v >> 16) & 0xFFu);
    p[3] = (uint8_t)((v >> 24) & 0xFFu);
}

void proto_put_u64(uint8_t *p, uint64_t v)
{
    proto_put_u32(p, (uint32_t)(v & 0xFFFFFFFFu));
    proto_put_u32(p + 4, (uint32_t)(v >> 32));
}

void proto_put_f32(uint8_t *p, float v)
{
    uint32_t bits;
    memcpy(&bits, &v, sizeof bits);
    proto_put_u32(p, bits);
}

uint16_t proto_get_u16(const uint8_t *p)
{
    return (uint16_t)((uint16_t)p[0] | (uint16_t)((uint16_t)p[1] << 8));
}

uint32_t proto_get_u32(const uint8_t *p)
{
    return (uint32_t)p[0] | ((uint32_t)p[1] << 8) | ((uint32_t)p[2] << 16) |
           ((uint32_t)p[3] << 24);
}

uint64_t proto_get_u64(const uint8_t *p)
{
    return (uint64_t)proto_get_u32(p) | ((uint64_t)proto_get_u32(p + 4) << 32);
}

float proto_get_f32(const uint8_t *p)
{
    uint32_t bits = proto_get_u32(p);
    float v;
    memcpy(&v, &bits, sizeof v);
    return v;
}

/* ---- frames and messages -------------------------------------------------- */

/* payload_len gives the fixed payload length of a type, or -1 if the type
 * is unknown. */
static long payload_len(uint8_t type)
{
    switch (type) {
    case PROTO_GREETING:
        return PROTO_GREETING_LEN;
    case PROTO_CONFIG:
        return PROTO_CONFIG_LEN;
    case PROTO_STATE:
        return PROTO_STATE_LEN;
    case PROTO_COMMAND:
        return PROTO_COMMAND_LEN;
    case PROTO_HEARTBEAT:
        return PROTO_HEARTBEAT_LEN;
    case PROTO_STOP:
        return PROTO_STOP_LEN;
    default:
        return -1;
    }
}

/* put_str32 writes a text as a str32: its bytes, then zeros up to 32. The C
 * string is cut at 32 bytes; the terminator is not sent. */
static void put_str32(uint8_t *p, const char *s)
{
    size_t i = 0;
    for (; i < PROTO_STR_LEN && s[i] != '\0'; i++) {
        p[i] = (uint8_t)s[i];
    }
    for (; i < PROTO_STR_LEN; i++) {
        p[i] = 0;
    }
}

/* get_str32 reads a str32: the bytes up to the first zero, or all 32. */
static void get_str32(const uint8_t *p, char *s)
{
    size_t i = 0;
    for (; i < PROTO_STR_LEN && p[i] != 0; i++) {
        s[i] = (char)p[i];
    }
    s[i] = '\0';
}

static int joints_ok(uint8_t j) { return j >= 1 && j <= PROTO_MAX_JOINTS; }

static int field_error(struct proto_diag *diag, const char *field, unsigned long got)
{
    if (diag) {
        diag->field = field;
        diag->got = got;
        diag->want = 0;
    }
    return PROTO_ERR_FIELD;
}

/* check_fields applies check 8 of section 5; the encoder and the decoder
 * share it so that what one side writes the other side accepts. */
static int check_fields(const struct proto_message *m, uint8_t header_version,
                        struct proto_diag *diag)
{
    switch (m->type) {
    case PROTO_GREETING:
        if (!joints_ok(m->u.greeting.actuators)) {
            return field_error(diag, "greeting actuators", m->u.greeting.actuators);
        }
        if (m->u.greeting.version != header_version) {
            return field_error(diag, "greeting version", m->u.greeting.version);
        }
        break;
    case PROTO_CONFIG:
        if (m->u.config.tick_hz == 0) {
            return field_error(diag, "config tick_hz", 0);
        }
        if (m->u.config.lockstep > 1) {
            return field_error(diag, "config lockstep", m->u.config.lockstep);
        }
        if (!joints_ok(m->u.config.joints)) {
            return field_error(diag, "config joints", m->u.config.joints);
        }
        if (m->u.config.watchdog_us == 0) {
            return field_error(diag, "config watchdog_us", 0);
        }
        break;
    case PROTO_STATE:
        if (!joints_ok(m->u.state.joints)) {
            return field_error(diag, "state joints", m->u.state.joints);
        }
        break;
    case PROTO_COMMAND:
        if (!joints_ok(m->u.command.joints)) {
            return field_error(diag, "command joints", m->u.command.joints);
        }
        break;
    default:
        break;
    }
    return PROTO_OK;
}

int proto_encode(const struct proto_message *m, uint8_t *out, size_t cap, size_t *len)
{
    long plen = payload_len(m->type);
    uint8_t *p = out + PROTO_HEADER_LEN;
    int rc;
    int i;

    *len = 0;
    if (plen < 0) {
        return PROTO_ERR_TYPE;
    }
    rc = check_fields(m, PROTO_VERSION, NULL);
    if (rc != PROTO_OK) {
        return rc;
    }
    if (cap < (size_t)plen + PROTO_OVERHEAD) {
        return PROTO_ERR_BUFFER;
    }
    /* Reserved bytes and unused slots go out as zero (section 1). */
    memset(out, 0, (size_t)plen + PROTO_OVERHEAD);
    out[0] = (uint8_t)PROTO_VERSION;
    out[1] = m->type;
    proto_put_u32(out + 2, m->seq);
    proto_put_u16(out + 6, (uint16_t)plen);

    switch (m->type) {
    case PROTO_GREETING:
        p[0] = (uint8_t)PROTO_VERSION;
        p[1] = m->u.greeting.actuators;
        put_str32(p + 2, m->u.greeting.name);
        put_str32(p + 34, m->u.greeting.build);
        break;
    case PROTO_CONFIG:
        proto_put_u16(p, m->u.config.tick_hz);
        p[2] = m->u.config.lockstep;
        p[3] = m->u.config.joints;
        for (i = 0; i < m->u.config.joints; i++) {
            put_str32(p + 4 + 32 * i, m->u.config.joint_names[i]);
            proto_put_f32(p + 260 + 4 * i, m->u.config.torque_limit[i]);
        }
        proto_put_u32(p + 292, m->u.config.watchdog_us);
        break;
    case PROTO_STATE:
        proto_put_u64(p, m->u.state.time_us);
        p[8] = m->u.state.joints;
        p[9] = m->u.state.contacts;
        for (i = 0; i < m->u.state.joints; i++) {
            proto_put_f32(p + 12 + 4 * i, m->u.state.angle[i]);
            proto_put_f32(p + 44 + 4 * i, m->u.state.rate[i]);
        }
        proto_put_f32(p + 76, m->u.state.imu_pitch);
        proto_put_f32(p + 80, m->u.state.imu_rate);
        break;
    case PROTO_COMMAND:
        p[0] = m->u.command.joints;
        proto_put_u16(p + 2, m->u.command.status);
        for (i = 0; i < m->u.command.joints; i++) {
            proto_put_f32(p + 4 + 4 * i, m->u.command.torque[i]);
        }
        break;
    case PROTO_STOP:
        p[0] = m->u.stop.reason;
        put_str32(p + 1, m->u.stop.text);
        break;
    default: /* heartbeat: no payload */
        break;
    }
    proto_put_u16(p + plen, proto_crc16(out, (size_t)plen + PROTO_HEADER_LEN));
    *len = (size_t)plen + PROTO_OVERHEAD;
    return PROTO_OK;
}

int proto_decode(const uint8_t *frame, size_t n, struct proto_message *m,
                 struct proto_diag *diag)
{
    const uint8_t *p = frame + PROTO_HEADER_LEN;
    size_t claimed;
    uint16_t stored, computed;
    long plen;
    int i;
    struct proto_diag scratch;

    if (diag == NULL) {
        diag = &scratch;
    }
    diag->got = 0;
    diag->want = 0;
    diag->field = NULL;
    memset(m, 0, sizeof *m);

    /* The checks run in the order of section 5, so the same damage always
     * gives the same error as in the Go implementation. */
    if (n < PROTO_OVERHEAD) {
        diag->got = (unsigned long)n;
        diag->want = PROTO_OVERHEAD;
        return PROTO_ERR_TRUNCATED;
    }
    if (n > PROTO_MAX_FRAME) {
        diag->got = (unsigned long)n;
        diag->want = PROTO_MAX_FRAME;
        return PROTO_ERR_TOO_LONG;
    }
    claimed = proto_get_u16(frame + 6);
    if (claimed + PROTO_OVERHEAD > n) {
        diag->got = (unsigned long)(n - PROTO_OVERHEAD);
        diag->want = (unsigned long)claimed;
        return PROTO_ERR_TRUNCATED;
    }
    if (claimed + PROTO_OVERHEAD < n) {
        diag->got = (unsigned long)(n - PROTO_OVERHEAD - claimed);
        diag->want = (unsigned long)claimed;
        return PROTO_ERR_EXTRA;
    }
    stored = proto_get_u16(frame + PROTO_HEADER_LEN + claimed);
    computed = proto_crc16(frame, PROTO_HEADER_LEN + claimed);
    if (stored != computed) {
        diag->got = stored;
        diag->want = computed;
        return PROTO_ERR_CRC;
    }
    if (frame[0] != PROTO_VERSION) {
        diag->got = frame[0];
        diag->want = PROTO_VERSION;
        return PROTO_ERR_VERSION;
    }
    plen = payload_len(frame[1]);
    if (plen < 0) {
        diag->got = frame[1];
        return PROTO_ERR_TYPE;
    }
    if ((size_t)plen != claimed) {
        diag->got = (unsigned long)claimed;
        diag->want = (unsigned long)plen;
        return PROTO_ERR_LENGTH;
    }

    m->version = frame[0];
    m->type = frame[1];
    m->seq = proto_get_u32(frame + 2);
    switch (m->type) {
    case PROTO_GREETING:
        m->u.greeting.version = p[0];
        m->u.greeting.actuators = p[1];
        get_str32(p + 2, m->u.greeting.name);
        get_str32(p + 34, m->u.greeting.build);
        break;
    case PROTO_CONFIG:
        m->u.config.tick_hz = proto_get_u16(p);
        m->u.config.lockstep = p[2];
        m->u.config.joints = p[3];
        /* Only the valid slots are read; the rest are ignored (section 1)
         * and stay zero here. */
        for (i = 0; i < m->u.config.joints && i < PROTO_MAX_JOINTS; i++) {
            get_str32(p + 4 + 32 * i, m->u.config.joint_names[i]);
            m->u.config.torque_limit[i] = proto_get_f32(p + 260 + 4 * i);
        }
        m->u.config.watchdog_us = proto_get_u32(p + 292);
        break;
    case PROTO_STATE:
        m->u.state.time_us = proto_get_u64(p);
        m->u.state.joints = p[8];
        m->u.state.contacts = p[9];
        for (i = 0; i < m->u.state.joints && i < PROTO_MAX_JOINTS; i++) {
            m->u.state.angle[i] = proto_get_f32(p + 12 + 4 * i);
            m->u.state.rate[i] = proto_get_f32(p + 44 + 4 * i);
        }
        m->u.state.imu_pitch = proto_get_f32(p + 76);
        m->u.state.imu_rate = proto_get_f32(p + 80);
        break;
    case PROTO_COMMAND:
        m->u.command.joints = p[0];
        m->u.command.status = proto_get_u16(p + 2);
        for (i = 0; i < m->u.command.joints && i < PROTO_MAX_JOINTS; i++) {
            m->u.command.torque[i] = proto_get_f32(p + 4 + 4 * i);
        }
        break;
    case PROTO_STOP:
        m->u.stop.reason = p[0];
        get_str32(p + 1, m->u.stop.text);
        break;
    default: /* heartbeat */
        break;
    }
    return check_fields(m, frame[0], diag);
}

int proto_write_frame(const struct proto_message *m, uint8_t *out, size_t cap, size_t *len)
{
    uint8_t raw[PROTO_MAX_FRAME];
    size_t raw_len = 0;
    size_t enc_len;
    int rc;

    *len = 0;
    rc = proto_encode(m, raw, sizeof raw, &raw_len);
    if (rc != PROTO_OK) {
        return rc;
    }
    if (cap < 1) {
        return PROTO_ERR_BUFFER;
    }
    enc_len = proto_cobs_encode(raw, raw_len, out, cap - 1);
    if (enc_len == 0) {
        return PROTO_ERR_BUFFER;
    }
    out[enc_len] = 0;
    *len = enc_len + 1;
    return PROTO_OK;
}

const char *proto_error_text(int code)
{
    switch (code) {
    case PROTO_OK:
        return "ok";
    case PROTO_ERR_TRUNCATED:
        return "truncated";
    case PROTO_ERR_TOO_LONG:
        return "too long";
    case PROTO_ERR_EXTRA:
        return "length mismatch (extra bytes)";
    case PROTO_ERR_CRC:
        return "bad CRC";
    case PROTO_ERR_VERSION:
        return "wrong protocol version";
    case PROTO_ERR_TYPE:
        return "unknown message type";
    case PROTO_ERR_LENGTH:
        return "length mismatch";
    case PROTO_ERR_FIELD:
        return "field out of range";
    case PROTO_ERR_BUFFER:
        return "output buffer too small";
    case PROTO_ERR_COBS:
        return "bad COBS";
    default:
        return "unknown error";
    }
}

const char *proto_stop_reason_text(uint8_t reason)
{
    static const char *const names[] = {"end",      "estop",       "watchdog", "aborted",
                                        "firmware", "bad_version", "mismatch"};
    if (reason < sizeof names / sizeof names[0]) {
        return names[reason];
    }
    return "unknown";
}
