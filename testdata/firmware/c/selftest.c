/*
 * selftest.c - checks of the C protocol code against outside vectors.
 *
 *   selftest                 built-in checks: CRC check value, COBS vectors,
 *                            float packing, encode/decode round trips and
 *                            rejection of damaged frames
 *   selftest frames FILE     decode every frame in FILE (one frame per line,
 *                            hex, spaces allowed, '#' starts a comment) and
 *                            print "line N: " and the message in the JSON
 *                            debug form of docs/protocol.md section 10, or
 *                            "line N: refused: CODE TEXT ..." with CODE a
 *                            proto_result number; each decoded frame is
 *                            re-encoded and must give the same bytes back
 *   selftest cobs FILE       lines "RAW-HEX | ENCODED-HEX": encode RAW and
 *                            decode ENCODED and compare both ways
 *   selftest law FILE        lines "JOINTS CONTACTS LIMIT A0 A1 R0 R1 P PR",
 *                            JOINTS and CONTACTS decimal, the rest float32
 *                            bit patterns in hex (LIMIT is the rig's torque
 *                            limit, A/R joint angles and rates, P/PR the IMU
 *                            pitch and rate); prints "line N: STANCE T0 T1 |
 *                            F0 F1 STATUS": the stance leg and the law's
 *                            double torques as 16-hex-digit bit patterns,
 *                            then the float32 torques (8 hex digits) and
 *                            status of the command ctl_step builds
 *
 * Exit status 0 when every check passed, 1 otherwise; each failure prints a
 * line starting with "FAIL".
 */
#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "controller.h"
#include "protocol.h"

static int failures;
static int checks;

static void check(int ok, const char *what)
{
    checks++;
    if (!ok) {
        failures++;
        printf("FAIL %s\n", what);
    }
}

static void print_hex(const uint8_t *p, size_t n)
{
    size_t i;
    for (i = 0; i < n; i++) {
        printf("%s%02X", i ? " " : "", (unsigned)p[i]);
    }
}

/* parse_hex reads hex digit pairs from s, skipping spaces, until '\0', '|' or
 * '#'. Returns the byte count, or -1 on a stray character or odd digit. */
static long parse_hex(const char *s, uint8_t *out, size_t cap, const char **end)
{
    size_t n = 0;
    int hi = -1;
    for (; *s && *s != '|' && *s != '#'; s++) {
        int v;
        if (isspace((unsigned char)*s)) {
            continue;
        }
        if (*s >= '0' && *s <= '9') {
            v = *s - '0';
        } else if (*s >= 'a' && *s <= 'f') {
            v = *s - 'a' + 10;
        } else if (*s >= 'A' && *s <= 'F') {
            v = *s - 'A' + 10;
        } else {
            return -1;
        }
        if (hi < 0) {
            hi = v;
        } else {
            if (n >= cap) {
                return -1;
            }
            out[n++] = (uint8_t)(hi * 16 + v);
            hi = -1;
        }
    }
    if (end) {
        *end = s;
    }
    return hi < 0 ? (long)n : -1;
}

/* ---- CRC -------------------------------------------------------------- */

static void test_crc(void)
{
    /* Check value of CRC-16/CCITT-FALSE over the ASCII digits "123456789"
     * is 0x29B1 (published CRC catalogue parameters). */
    const char *digits = "123456789";
    check(proto_crc16((const uint8_t *)digits, 9) == 0x29B1u, "crc16(\"123456789\") == 0x29B1");
    /* The CRC of nothing is the initial value, by the definition of the
     * algorithm (init 0xFFFF, no final XOR). */
    check(proto_crc16((const uint8_t *)digits, 0) == 0xFFFFu, "crc16(empty) == 0xFFFF");
}

/* ---- COBS ------------------------------------------------------------- */

/* cobs_pair checks that raw encodes to enc and enc decodes to raw. */
static void cobs_pair(const char *name, const uint8_t *raw, size_t raw_n, const uint8_t *enc,
                      size_t enc_n)
{
    uint8_t buf[1200];
    size_t n;
    int rc;
    char what[160];

    n = proto_cobs_encode(raw, raw_n, buf, sizeof buf);
    snprintf(what, sizeof what, "cobs encode %s", name);
    check(n == enc_n && memcmp(buf, enc, enc_n) == 0, what);
    if (!(n == enc_n && memcmp(buf, enc, enc_n) == 0)) {
        printf("     got  ");
        print_hex(buf, n);
        printf("\n     want ");
        print_hex(enc, enc_n);
        printf("\n");
    }
    rc = proto_cobs_decode(enc, enc_n, buf, sizeof buf, &n);
    snprintf(what, sizeof what, "cobs decode %s", name);
    check(rc == PROTO_COBS_OK && n == raw_n && memcmp(buf, raw, raw_n) == 0, what);
}

static void test_cobs(void)
{
    /* Vectors that follow directly from the rules in Cheshire and Baker
     * (1999): each zero is replaced by the distance to the next zero, and a
     * run of 254 non-zero bytes is closed by the code 0xFF, which adds no
     * zero. The short cases are the usual worked examples (from memory);
     * the long ones are built here from the same rules. */
    static const uint8_t r1[] = {0x00}, e1[] = {0x01, 0x01};
    static const uint8_t r2[] = {0x00, 0x00}, e2[] = {0x01, 0x01, 0x01};
    static const uint8_t r3[] = {0x00, 0x11, 0x00}, e3[] = {0x01, 0x02, 0x11, 0x01};
    static const uint8_t r4[] = {0x11, 0x22, 0x00, 0x33}, e4[] = {0x03, 0x11, 0x22, 0x02, 0x33};
    static const uint8_t r5[] = {0x11, 0x22, 0x33, 0x44}, e5[] = {0x05, 0x11, 0x22, 0x33, 0x44};
    static const uint8_t r6[] = {0x11, 0x00, 0x00, 0x00}, e6[] = {0x02, 0x11, 0x01, 0x01, 0x01};
    uint8_t raw[300], enc[300];
    size_t i, n;
    int rc;

    cobs_pair("{00}", r1, sizeof r1, e1, sizeof e1);
    cobs_pair("{00 00}", r2, sizeof r2, e2, sizeof e2);
    cobs_pair("{00 11 00}", r3, sizeof r3, e3, sizeof e3);
    cobs_pair("{11 22 00 33}", r4, sizeof r4, e4, sizeof e4);
    cobs_pair("{11 22 33 44}", r5, sizeof r5, e5, sizeof e5);
    cobs_pair("{11 00 00 00}", r6, sizeof r6, e6, sizeof e6);
    /* The empty input encodes to the single code byte 01. */
    {
        static const uint8_t e0[] = {0x01};
        cobs_pair("{}", r1, 0, e0, sizeof e0);
    }

    /* 01..FE: exactly 254 non-zero bytes fill one block, FF 01..FE. */
    for (i = 0; i < 254; i++) {
        raw[i] = (uint8_t)(i + 1);
    }
    enc[0] = 0xFF;
    memcpy(enc + 1, raw, 254);
    cobs_pair("01..FE", raw, 254, enc, 255);

    /* 00 01..FE: 01 FF 01..FE. */
    raw[0] = 0;
    for (i = 1; i < 255; i++) {
        raw[i] = (uint8_t)i;
    }
    enc[0] = 0x01;
    enc[1] = 0xFF;
    memcpy(enc + 2, raw + 1, 254);
    cobs_pair("00 01..FE", raw, 255, enc, 256);

    /* 01..FF: FF 01..FE 02 FF. */
    for (i = 0; i < 255; i++) {
        raw[i] = (uint8_t)(i + 1);
    }
    enc[0] = 0xFF;
    memcpy(enc + 1, raw, 254);
    enc[255] = 0x02;
    enc[256] = 0xFF;
    cobs_pair("01..FF", raw, 255, enc, 257);

    /* 02..FF 00: FF 02..FF 01 01. */
    for (i = 0; i < 254; i++) {
        raw[i] = (uint8_t)(i + 2);
    }
    raw[254] = 0;
    enc[0] = 0xFF;
    memcpy(enc + 1, raw, 254);
    enc[255] = 0x01;
    enc[256] = 0x01;
    cobs_pair("02..FF 00", raw, 255, enc, 257);

    /* Damaged blocks are refused, never read past. */
    {
        static const uint8_t zero_inside[] = {0x03, 0x11, 0x00};
        static const uint8_t too_short[] = {0x05, 0x11, 0x22};
        static const uint8_t code_zero[] = {0x00};
        rc = proto_cobs_decode(zero_inside, sizeof zero_inside, raw, sizeof raw, &n);
        check(rc == PROTO_COBS_ZERO && n == 0, "cobs decode refuses a zero inside a block");
        rc = proto_cobs_decode(too_short, sizeof too_short, raw, sizeof raw, &n);
        check(rc == PROTO_COBS_SHORT && n == 0, "cobs decode refuses a block cut short");
        rc = proto_cobs_decode(code_zero, sizeof code_zero, raw, sizeof raw, &n);
        check(rc == PROTO_COBS_ZERO, "cobs decode refuses a zero code byte");
        rc = proto_cobs_decode(e5, 0, raw, sizeof raw, &n);
        check(rc == PROTO_COBS_EMPTY, "cobs decode refuses an empty block");
        rc = proto_cobs_decode(e5, sizeof e5, raw, 3, &n);
        check(rc == PROTO_COBS_OVERFLOW, "cobs decode refuses output that does not fit");
        n = proto_cobs_encode(r5, sizeof r5, enc, 4);
        check(n == 0, "cobs encode refuses output that does not fit");
        n = proto_cobs_encode(r5, sizeof r5, enc, 5);
        check(n == 5, "cobs encode fits an exact buffer");
    }
}

/* ---- float and integer packing ----------------------------------------- */

static void test_packing(void)
{
    uint8_t b[8];
    /* IEEE-754 binary32 bit patterns: 1.0 = 0x3F800000, -2.5 = 0xC0200000
     * (from the format definition: sign, biased exponent 127, mantissa). */
    proto_put_f32(b, 1.0f);
    check(b[0] == 0x00 && b[1] == 0x00 && b[2] == 0x80 && b[3] == 0x3F,
          "float 1.0 packs as 00 00 80 3F");
    proto_put_f32(b, -2.5f);
    check(b[0] == 0x00 && b[1] == 0x00 && b[2] == 0x20 && b[3] == 0xC0,
          "float -2.5 packs as 00 00 20 C0");
    check(proto_get_f32(b) == -2.5f, "float -2.5 unpacks");
    proto_put_u16(b, 0x1234u);
    check(b[0] == 0x34 && b[1] == 0x12, "u16 is little-endian");
    proto_put_u32(b, 0xA1B2C3D4u);
    check(b[0] == 0xD4 && b[3] == 0xA1 && proto_get_u32(b) == 0xA1B2C3D4u,
          "u32 is little-endian");
    proto_put_u64(b, 0x0102030405060708ull);
    check(b[0] == 0x08 && b[7] == 0x01 && proto_get_u64(b) == 0x0102030405060708ull,
          "u64 is little-endian");
}


/* ---- messages ----------------------------------------------------------- */

/* json_str prints a JSON string: quotes, backslashes and control bytes are
 * escaped, other bytes go out as they are (str32 fields are UTF-8). */
static void json_str(const char *s)
{
    putchar('"');
    for (; *s; s++) {
        unsigned char c = (unsigned char)*s;
        if (c == '"' || c == '\\') {
            printf("\\%c", c);
        } else if (c < 0x20) {
            printf("\\u%04x", (unsigned)c);
        } else {
            putchar(c);
        }
    }
    putchar('"');
}

/* json_f32 prints a float32 as section 10 asks: a number that round-trips
 * (%.9g gives the 9 significant digits a float32 needs), or "NaN", "+Inf",
 * "-Inf". */
static void json_f32(float v)
{
    if (isnan(v)) {
        printf("\"NaN\"");
    } else if (isinf(v)) {
        printf(v > 0 ? "\"+Inf\"" : "\"-Inf\"");
    } else {
        printf("%.9g", (double)v);
    }
}

static void json_f32s(const char *key, const float *v, int n)
{
    int i;
    printf(",\"%s\":[", key);
    for (i = 0; i < n; i++) {
        if (i) {
            putchar(',');
        }
        json_f32(v[i]);
    }
    putchar(']');
}

/* describe prints a message as one line of the JSON debug form of
 * docs/protocol.md section 10, so the Go test can read it with
 * protocol.ParseJSON and compare it with the Go decoder's result. */
static void describe(const struct proto_message *m)
{
    int i;
    switch (m->type) {
    case PROTO_GREETING:
        /* The JSON form has one "version", the frame's; a greeting whose
         * own version field differs does not decode. */
        printf("{\"type\":\"greeting\",\"seq\":%lu,\"version\":%u,\"actuators\":%u,\"name\":",
               (unsigned long)m->seq, (unsigned)m->version,
               (unsigned)m->u.greeting.actuators);
        json_str(m->u.greeting.name);
        printf(",\"build\":");
        json_str(m->u.greeting.build);
        break;
    case PROTO_CONFIG:
        printf("{\"type\":\"config\",\"seq\":%lu,\"version\":%u,\"tick_hz\":%u,\"lockstep\":%s,"
               "\"joints\":%u,\"joint_names\":[",
               (unsigned long)m->seq, (unsigned)m->version, (unsigned)m->u.config.tick_hz,
               m->u.config.lockstep ? "true" : "false", (unsigned)m->u.config.joints);
        for (i = 0; i < m->u.config.joints; i++) {
            if (i) {
                putchar(',');
            }
            json_str(m->u.config.joint_names[i]);
        }
        putchar(']');
        json_f32s("torque_limit", m->u.config.torque_limit, m->u.config.joints);
        printf(",\"watchdog_us\":%lu", (unsigned long)m->u.config.watchdog_us);
        break;
    case PROTO_STATE:
        printf("{\"type\":\"state\",\"seq\":%lu,\"version\":%u,\"time_us\":%llu,\"joints\":%u,"
               "\"contacts\":%u",
               (unsigned long)m->seq, (unsigned)m->version, (unsigned long long)m->u.state.time_us,
               (unsigned)m->u.state.joints, (unsigned)m->u.state.contacts);
        json_f32s("angle", m->u.state.angle, m->u.state.joints);
        json_f32s("rate", m->u.state.rate, m->u.state.joints);
        printf(",\"imu_pitch\":");
        json_f32(m->u.state.imu_pitch);
        printf(",\"imu_rate\":");
        json_f32(m->u.state.imu_rate);
        break;
    case PROTO_COMMAND:
        printf("{\"type\":\"command\",\"seq\":%lu,\"version\":%u,\"joints\":%u,\"status\":%u",
               (unsigned long)m->seq, (unsigned)m->version, (unsigned)m->u.command.joints,
               (unsigned)m->u.command.status);
        json_f32s("torque", m->u.command.torque, m->u.command.joints);
        break;
    case PROTO_HEARTBEAT:
        printf("{\"type\":\"heartbeat\",\"seq\":%lu,\"version\":%u", (unsigned long)m->seq,
               (unsigned)m->version);
        break;
    case PROTO_STOP:
        printf("{\"type\":\"stop\",\"seq\":%lu,\"version\":%u,\"reason\":%u,"
               "\"reason_name\":\"%s\",\"text\":",
               (unsigned long)m->seq, (unsigned)m->version, (unsigned)m->u.stop.reason,
               proto_stop_reason_text(m->u.stop.reason));
        json_str(m->u.stop.text);
        break;
    default:
        printf("{\"type\":\"0x%02X\"", (unsigned)m->type);
        break;
    }
    putchar('}');
}

/* roundtrip encodes m, decodes it back and re-encodes, expecting the same
 * bytes, then checks that each single-bit flip of the frame is refused. */
static void roundtrip(const char *name, const struct proto_message *m, size_t want_len)
{
    uint8_t a[PROTO_MAX_FRAME], b[PROTO_MAX_FRAME];
    uint8_t line[PROTO_COBS_MAX(PROTO_MAX_FRAME) + 1];
    uint8_t back[PROTO_MAX_FRAME];
    size_t na = 0, nb = 0, nl = 0, nback = 0;
    struct proto_message d;
    struct proto_diag diag;
    char what[160];
    size_t i;
    int bit, rc, refused = 1;

    rc = proto_encode(m, a, sizeof a, &na);
    snprintf(what, sizeof what, "encode %s gives a %lu-byte frame", name, (unsigned long)want_len);
    check(rc == PROTO_OK && na == want_len, what);
    rc = proto_decode(a, na, &d, &diag);
    snprintf(what, sizeof what, "decode %s (%s)", name, proto_error_text(rc));
    check(rc == PROTO_OK && d.type == m->type && d.seq == m->seq, what);
    rc = proto_encode(&d, b, sizeof b, &nb);
    snprintf(what, sizeof what, "re-encode %s gives the same bytes", name);
    check(rc == PROTO_OK && na == nb && memcmp(a, b, na) == 0, what);

    rc = proto_write_frame(m, line, sizeof line, &nl);
    snprintf(what, sizeof what, "%s on a byte stream: COBS with one zero, at the end", name);
    check(rc == PROTO_OK && nl >= 2 && line[nl - 1] == 0 && memchr(line, 0, nl - 1) == NULL,
          what);
    rc = proto_cobs_decode(line, nl - 1, back, sizeof back, &nback);
    snprintf(what, sizeof what, "%s byte stream decodes to the frame", name);
    check(rc == PROTO_COBS_OK && nback == na && memcmp(back, a, na) == 0, what);

    /* CRC-16 detects every single-bit error (a property of any CRC whose
     * polynomial has more than one term), so every flip must be refused. */
    for (i = 0; i < na; i++) {
        for (bit = 0; bit < 8; bit++) {
            memcpy(b, a, na);
            b[i] ^= (uint8_t)(1u << bit);
            if (proto_decode(b, na, &d, NULL) == PROTO_OK) {
                refused = 0;
            }
        }
    }
    snprintf(what, sizeof what, "every single-bit flip of %s is refused", name);
    check(refused, what);
}

/* expect_refusal re-signs a damaged frame (so the CRC passes when the test
 * means to reach a later check) and checks the result code. */
static void expect_refusal(const char *name, uint8_t *f, size_t n, int resign, int want)
{
    struct proto_message d;
    char what[160];
    int rc;
    if (resign && n >= PROTO_OVERHEAD) {
        proto_put_u16(f + n - 2, proto_crc16(f, n - 2));
    }
    rc = proto_decode(f, n, &d, NULL);
    snprintf(what, sizeof what, "%s is refused as \"%s\" (got \"%s\")", name, proto_error_text(want),
             proto_error_text(rc));
    check(rc == want, what);
}

static void test_messages(void)
{
    struct proto_message m;
    uint8_t f[PROTO_MAX_FRAME + 8];
    size_t n = 0;
    int i;

    memset(&m, 0, sizeof m);
    m.type = PROTO_GREETING;
    m.u.greeting.version = PROTO_VERSION;
    m.u.greeting.actuators = 2;
    strcpy(m.u.greeting.name, "selftest");
    /* exactly 32 bytes: the wire form has no terminator */
    strcpy(m.u.greeting.build, "0123456789abcdef0123456789abcdef");
    roundtrip("greeting", &m, 76);

    memset(&m, 0, sizeof m);
    m.type = PROTO_CONFIG;
    m.u.config.tick_hz = 1000;
    m.u.config.lockstep = 1;
    m.u.config.joints = PROTO_MAX_JOINTS;
    for (i = 0; i < PROTO_MAX_JOINTS; i++) {
        snprintf(m.u.config.joint_names[i], sizeof m.u.config.joint_names[i], "joint_%d", i);
        m.u.config.torque_limit[i] = 10.0f + (float)i;
    }
    m.u.config.watchdog_us = 0x01020304u;
    roundtrip("config", &m, 306);
    /* watchdog_us is the u32 at payload offset 292 (section 3.2), low
     * byte first. */
    proto_encode(&m, f, sizeof f, &n);
    check(n == 306 && f[8 + 292] == 0x04 && f[8 + 293] == 0x03 && f[8 + 294] == 0x02 &&
              f[8 + 295] == 0x01,
          "config watchdog_us is the little-endian u32 at payload offset 292");

    memset(&m, 0, sizeof m);
    m.type = PROTO_STATE;
    m.seq = 0xFFFFFFFFu;
    m.u.state.time_us = 0x0123456789ull;
    m.u.state.joints = 2;
    m.u.state.contacts = PROTO_CONTACT_LEFT;
    m.u.state.angle[0] = 0.25f;
    m.u.state.angle[1] = -0.125f;
    m.u.state.rate[0] = 1.5f;
    m.u.state.imu_pitch = -0.0625f;
    roundtrip("state", &m, 94);

    memset(&m, 0, sizeof m);
    m.type = PROTO_COMMAND;
    m.seq = 7;
    m.u.command.joints = 1;
    m.u.command.status = PROTO_STATUS_SAFE_MODE;
    m.u.command.torque[0] = -3.0f;
    roundtrip("command", &m, 46);

    memset(&m, 0, sizeof m);
    m.type = PROTO_HEARTBEAT;
    m.seq = 3;
    roundtrip("heartbeat", &m, 10);

    memset(&m, 0, sizeof m);
    m.type = PROTO_STOP;
    m.u.stop.reason = PROTO_STOP_WATCHDOG;
    strcpy(m.u.stop.text, "selftest");
    roundtrip("stop", &m, 43);

    /* The encoder refuses what a receiver would refuse. */
    m.type = 0x7F;
    check(proto_encode(&m, f, sizeof f, &n) == PROTO_ERR_TYPE, "encode refuses an unknown type");
    memset(&m, 0, sizeof m);
    m.type = PROTO_COMMAND;
    m.u.command.joints = 9;
    check(proto_encode(&m, f, sizeof f, &n) == PROTO_ERR_FIELD, "encode refuses 9 joints");
    m.u.command.joints = 1;
    check(proto_encode(&m, f, 20, &n) == PROTO_ERR_BUFFER && n == 0,
          "encode refuses a buffer that is too small");

    /* Each check of section 5, reached one at a time from a good heartbeat. */
    memset(&m, 0, sizeof m);
    m.type = PROTO_HEARTBEAT;
    proto_encode(&m, f, sizeof f, &n);
    expect_refusal("a 9-byte frame", f, 9, 0, PROTO_ERR_TRUNCATED);
    memset(f, 0x55, sizeof f);
    expect_refusal("a 513-byte frame", f, 513, 0, PROTO_ERR_TOO_LONG);

    memset(&m, 0, sizeof m);
    m.type = PROTO_STOP;
    proto_encode(&m, f, sizeof f, &n);
    expect_refusal("a stop frame cut short", f, n - 1, 0, PROTO_ERR_TRUNCATED);
    proto_encode(&m, f, sizeof f, &n);
    f[n] = 0;
    expect_refusal("a stop frame with an extra byte", f, n + 1, 0, PROTO_ERR_EXTRA);
    proto_encode(&m, f, sizeof f, &n);
    f[8] ^= 0x01;
    expect_refusal("a stop frame with a flipped bit", f, n, 0, PROTO_ERR_CRC);
    proto_encode(&m, f, sizeof f, &n);
    f[0] = 1;
    expect_refusal("a version-1 frame", f, n, 1, PROTO_ERR_VERSION);
    proto_encode(&m, f, sizeof f, &n);
    f[0] = 3;
    expect_refusal("a version-3 frame", f, n, 1, PROTO_ERR_VERSION);
    proto_encode(&m, f, sizeof f, &n);
    f[1] = 0x31;
    expect_refusal("type 0x31", f, n, 1, PROTO_ERR_TYPE);
    proto_encode(&m, f, sizeof f, &n);
    f[1] = PROTO_COMMAND; /* a command must have 36 payload bytes, not 33 */
    expect_refusal("a command with a stop's length", f, n, 1, PROTO_ERR_LENGTH);

    memset(&m, 0, sizeof m);
    m.type = PROTO_CONFIG;
    m.u.config.tick_hz = 1000;
    m.u.config.joints = 1;
    m.u.config.watchdog_us = 50000;
    proto_encode(&m, f, sizeof f, &n);
    f[8 + 2] = 2;
    expect_refusal("config lockstep 2", f, n, 1, PROTO_ERR_FIELD);
    proto_encode(&m, f, sizeof f, &n);
    f[8] = 0;
    f[9] = 0;
    expect_refusal("config tick_hz 0", f, n, 1, PROTO_ERR_FIELD);
    proto_encode(&m, f, sizeof f, &n);
    f[8 + 3] = 0;
    expect_refusal("config with 0 joints", f, n, 1, PROTO_ERR_FIELD);
    proto_encode(&m, f, sizeof f, &n);
    memset(f + 8 + 292, 0, 4);
    expect_refusal("config with watchdog_us 0", f, n, 1, PROTO_ERR_FIELD);
    m.u.config.watchdog_us = 0;
    check(proto_encode(&m, f, sizeof f, &n) == PROTO_ERR_FIELD,
          "encode refuses a config without a watchdog");

    memset(&m, 0, sizeof m);
    m.type = PROTO_GREETING;
    m.u.greeting.version = PROTO_VERSION;
    m.u.greeting.actuators = 1;
    proto_encode(&m, f, sizeof f, &n);
    f[8] = 3;
    expect_refusal("a greeting whose version differs from its header", f, n, 1, PROTO_ERR_FIELD);
}

/* ctl_link_state against values worked out by hand from its rule: quiet
 * beyond one watchdog, lost after 20 watchdogs but never before 10 s. */
/* A kneed torso walker's four joints, in a shuffled slot order: the hips
 * get the law's torques as in a two-joint configuration, the knees zero
 * (this firmware leaves them passive); four joints without knee names, or
 * five, are refused. */
static void test_knees(void)
{
    struct proto_config rig, rig2;
    struct ctl_config cfg, cfg2;
    struct proto_state st, st2;
    struct proto_command cmd, cmd2;
    int i;

    memset(&rig, 0, sizeof rig);
    rig.tick_hz = 1000;
    rig.lockstep = 1;
    rig.watchdog_us = 50000;
    rig.joints = 4;
    strcpy(rig.joint_names[0], "knee_right");
    strcpy(rig.joint_names[1], "hip_left");
    strcpy(rig.joint_names[2], "knee_left");
    strcpy(rig.joint_names[3], "hip_right");
    for (i = 0; i < 4; i++) {
        rig.torque_limit[i] = 40.0f;
    }
    check(ctl_configure(&cfg, &rig, 4) == NULL, "a kneed torso walker's four joints are taken");
    check(cfg.hips == 2 && cfg.joints == 4, "four joints: two hips for the law");
    memset(&rig2, 0, sizeof rig2);
    rig2.tick_hz = 1000;
    rig2.lockstep = 1;
    rig2.watchdog_us = 50000;
    rig2.joints = 2;
    strcpy(rig2.joint_names[0], "hip_left");
    strcpy(rig2.joint_names[1], "hip_right");
    rig2.torque_limit[0] = rig2.torque_limit[1] = 40.0f;
    check(ctl_configure(&cfg2, &rig2, 2) == NULL, "the torso walker's two joints are taken");

    memset(&st, 0, sizeof st);
    st.joints = 4;
    st.contacts = 1;
    st.angle[1] = 0.35f; /* hip_left */
    st.angle[3] = -0.4f; /* hip_right */
    st.angle[0] = -0.3f; /* knee_right, flexed */
    st.rate[1] = -0.9f;
    st.rate[3] = 0.5f;
    st.imu_pitch = -0.1f;
    memset(&st2, 0, sizeof st2);
    st2.joints = 2;
    st2.contacts = 1;
    st2.angle[0] = 0.35f;
    st2.angle[1] = -0.4f;
    st2.rate[0] = -0.9f;
    st2.rate[1] = 0.5f;
    st2.imu_pitch = -0.1f;
    ctl_step(&cfg, &st, &cmd);
    ctl_step(&cfg2, &st2, &cmd2);
    check(cmd.joints == 4 && cmd.status == 0, "a kneed state is answered with four torques");
    check(cmd.torque[1] == cmd2.torque[0] && cmd.torque[3] == cmd2.torque[1] && cmd2.torque[0] != 0.0f,
          "the hips of a kneed walker get the torso walker's torques");
    check(cmd.torque[0] == 0.0f && cmd.torque[2] == 0.0f, "the knees are left passive (zero torque)");

    strcpy(rig.joint_names[0], "ankle_right");
    check(ctl_configure(&cfg, &rig, 4) != NULL, "four joints without knee_right are refused");
    rig.joints = 5;
    check(ctl_configure(&cfg, &rig, 5) != NULL, "five joints are refused");
}

static void test_link(void)
{
    struct ctl_config c;
    memset(&c, 0, sizeof c);
    c.watchdog_us = 50000; /* 50 ms: lost after max(10 s, 1 s) = 10 s */
    check(ctl_link_state(&c, 50) == CTL_LINK_OK, "50 ms of silence is within a 50 ms watchdog");
    check(ctl_link_state(&c, 51) == CTL_LINK_QUIET, "51 ms of silence is beyond a 50 ms watchdog");
    check(ctl_lost_ms(&c) == 10000, "a 50 ms watchdog gives up after the 10 s floor");
    check(ctl_link_state(&c, 9999) == CTL_LINK_QUIET, "9999 ms with a 50 ms watchdog is quiet");
    check(ctl_link_state(&c, 10000) == CTL_LINK_LOST, "10 s with a 50 ms watchdog is lost");
    c.watchdog_us = 1000000; /* 1 s: lost after 20 s */
    check(ctl_link_state(&c, 1000) == CTL_LINK_OK, "1 s of silence is within a 1 s watchdog");
    check(ctl_link_state(&c, 1001) == CTL_LINK_QUIET, "1.001 s is beyond a 1 s watchdog");
    check(ctl_link_state(&c, 19999) == CTL_LINK_QUIET, "19.999 s with a 1 s watchdog is quiet");
    check(ctl_link_state(&c, 20000) == CTL_LINK_LOST, "20 s with a 1 s watchdog is lost");
    c.watchdog_us = 500; /* below a millisecond: any whole millisecond is beyond */
    check(ctl_link_state(&c, 0) == CTL_LINK_OK && ctl_link_state(&c, 1) == CTL_LINK_QUIET,
          "a 500 us watchdog: 0 ms ok, 1 ms quiet");
    c.watchdog_us = 0xFFFFFFFFu; /* 20 x 4294.967295 s = 85899345.9 ms, rounded up */
    check(ctl_lost_ms(&c) == 85899346u, "the largest watchdog does not overflow the lost limit");
}

/* ---- vectors from files ---------------------------------------------------- */

static int run_frames_file(const char *path)
{
    FILE *in = fopen(path, "r");
    char line[4096];
    int lineno = 0;
    if (in == NULL) {
        printf("FAIL cannot open %s\n", path);
        return 1;
    }
    while (fgets(line, sizeof line, in) != NULL) {
        uint8_t f[PROTO_MAX_FRAME + 64], again[PROTO_MAX_FRAME];
        size_t n2 = 0;
        long n;
        struct proto_message m;
        struct proto_diag diag;
        int rc;
        const char *end;
        char what[96];

        lineno++;
        n = parse_hex(line, f, sizeof f, &end);
        if (n < 0) {
            printf("FAIL %s:%d: not a hex frame\n", path, lineno);
            failures++;
            continue;
        }
        if (n == 0) {
            continue;
        }
        rc = proto_decode(f, (size_t)n, &m, &diag);
        if (rc != PROTO_OK) {
            printf("line %d: refused: %d %s (got %lu, want %lu)\n", lineno, rc,
                   proto_error_text(rc), diag.got, diag.want);
            continue;
        }
        printf("line %d: ", lineno);
        describe(&m);
        printf("\n");
        rc = proto_encode(&m, again, sizeof again, &n2);
        snprintf(what, sizeof what, "%s:%d: re-encoding gives the same bytes", path, lineno);
        check(rc == PROTO_OK && n2 == (size_t)n && memcmp(again, f, n2) == 0, what);
    }
    fclose(in);
    return failures ? 1 : 0;
}

static int run_cobs_file(const char *path)
{
    FILE *in = fopen(path, "r");
    static char line[8192];
    int lineno = 0;
    if (in == NULL) {
        printf("FAIL cannot open %s\n", path);
        return 1;
    }
    while (fgets(line, sizeof line, in) != NULL) {
        static uint8_t raw[2048], enc[2048];
        long nr, ne;
        const char *end;
        char name[64];

        lineno++;
        nr = parse_hex(line, raw, sizeof raw, &end);
        if (*end == '#' || (*end == '\0' && nr == 0)) {
            continue;
        }
        if (nr < 0 || *end != '|') {
            printf("FAIL %s:%d: want \"RAW-HEX | ENCODED-HEX\"\n", path, lineno);
            failures++;
            continue;
        }
        ne = parse_hex(end + 1, enc, sizeof enc, NULL);
        if (ne < 0) {
            printf("FAIL %s:%d: encoded part is not hex\n", path, lineno);
            failures++;
            continue;
        }
        snprintf(name, sizeof name, "%s:%d", path, lineno);
        cobs_pair(name, raw, (size_t)nr, enc, (size_t)ne);
    }
    fclose(in);
    printf("%s: %d COBS checks, %d failed\n", failures ? "FAIL" : "ok", checks, failures);
    return failures ? 1 : 0;
}

/* ---- the control law ----------------------------------------------------- */

static uint64_t double_bits(double v)
{
    uint64_t b;
    memcpy(&b, &v, sizeof b);
    return b;
}

static uint32_t float_bits(float v)
{
    uint32_t b;
    memcpy(&b, &v, sizeof b);
    return b;
}

static float float_of_bits(unsigned long u)
{
    uint32_t b = (uint32_t)u;
    float v;
    memcpy(&v, &b, sizeof v);
    return v;
}

static int run_law_file(const char *path)
{
    FILE *in = fopen(path, "r");
    char line[512];
    int lineno = 0;
    if (in == NULL) {
        printf("FAIL cannot open %s\n", path);
        return 1;
    }
    while (fgets(line, sizeof line, in) != NULL) {
        unsigned joints, contacts;
        unsigned long v[7], lim;
        struct proto_config rig;
        struct proto_state st;
        struct proto_command cmd;
        struct ctl_config cfg;
        struct ctl_reading r;
        double tau[2] = {0, 0};
        const char *why;
        int stance, i;

        lineno++;
        if (line[0] == '#' || line[0] == '\n') {
            continue;
        }
        if (sscanf(line, "%u %u %lx %lx %lx %lx %lx %lx %lx", &joints, &contacts, &lim, &v[0],
                   &v[1], &v[2], &v[3], &v[4], &v[5]) != 9 ||
            joints < 1 || joints > 2) {
            printf("FAIL %s:%d: want JOINTS CONTACTS LIMIT A0 A1 R0 R1 P PR\n", path, lineno);
            failures++;
            continue;
        }
        memset(&rig, 0, sizeof rig);
        rig.tick_hz = 1000;
        rig.lockstep = 1;
        rig.watchdog_us = 50000;
        rig.joints = (uint8_t)joints;
        if (joints == 2) {
            strcpy(rig.joint_names[0], "hip_left");
            strcpy(rig.joint_names[1], "hip_right");
        } else {
            strcpy(rig.joint_names[0], "hip");
        }
        for (i = 0; i < (int)joints; i++) {
            rig.torque_limit[i] = float_of_bits(lim);
        }
        why = ctl_configure(&cfg, &rig, (int)joints);
        if (why != NULL) {
            printf("FAIL %s:%d: configuration refused: %s\n", path, lineno, why);
            failures++;
            continue;
        }
        memset(&st, 0, sizeof st);
        st.joints = (uint8_t)joints;
        st.contacts = (uint8_t)contacts;
        st.angle[0] = float_of_bits(v[0]);
        st.angle[1] = joints == 2 ? float_of_bits(v[1]) : 0.0f;
        st.rate[0] = float_of_bits(v[2]);
        st.rate[1] = joints == 2 ? float_of_bits(v[3]) : 0.0f;
        st.imu_pitch = float_of_bits(v[4]);
        st.imu_rate = float_of_bits(v[5]);

        /* The law on the same doubles the Go runner builds from a state. */
        memset(&r, 0, sizeof r);
        r.joints = (int)joints;
        r.contacts = st.contacts;
        r.pitch = (double)st.imu_pitch;
        r.pitch_rate = (double)st.imu_rate;
        for (i = 0; i < (int)joints; i++) {
            r.angle[i] = (double)st.angle[i];
            r.rate[i] = (double)st.rate[i];
        }
        stance = ctl_law(&cfg.gains, &r, tau);
        ctl_step(&cfg, &st, &cmd);
        printf("line %d: %d %016llx %016llx | %08lx %08lx %u\n", lineno, stance,
               (unsigned long long)double_bits(tau[0]), (unsigned long long)double_bits(tau[1]),
               (unsigned long)float_bits(cmd.torque[0]), (unsigned long)float_bits(cmd.torque[1]),
               (unsigned)cmd.status);
    }
    fclose(in);
    return failures ? 1 : 0;
}

int main(int argc, char **argv)
{
    if (argc == 1) {
        test_crc();
        test_cobs();
        test_packing();
        test_messages();
        test_link();
        test_knees();
        printf("%s: %d checks, %d failed\n", failures ? "FAIL" : "ok", checks, failures);
        return failures ? 1 : 0;
    }
    if (argc == 3 && strcmp(argv[1], "frames") == 0) {
        return run_frames_file(argv[2]);
    }
    if (argc == 3 && strcmp(argv[1], "cobs") == 0) {
        return run_cobs_file(argv[2]);
    }
    if (argc == 3 && strcmp(argv[1], "law") == 0) {
        return run_law_file(argv[2]);
    }
    fprintf(stderr, "usage: %s [frames FILE | cobs FILE | law FILE]\n", argv[0]);
    return 2;
}
