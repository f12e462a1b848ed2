/*
 * protocol.h - the gaitrig wire protocol in portable C99, written from the
 * specification in docs/protocol.md: CRC-16/CCITT-FALSE, COBS framing,
 * little-endian packing of integers and IEEE-754 float32 values, and the
 * encoding and decoding of every message.
 *
 * Portable C99: no OS calls, no malloc, no globals beyond const tables. Every
 * function works on caller-supplied buffers and reports overflow instead of
 * writing past the end, so it can run unchanged on a microcontroller.
 */
#ifndef GAITRIG_PROTO_H
#define GAITRIG_PROTO_H

#include <stddef.h>
#include <stdint.h>

/* CRC-16/CCITT-FALSE: poly 0x1021, init 0xFFFF, no reflection, no final XOR.
 * Check value of the ASCII bytes "123456789" is 0x29B1 (published CRC
 * catalogue parameters). */
uint16_t proto_crc16(const uint8_t *data, size_t n);

/* Largest COBS output for n input bytes: one overhead byte per started block
 * of 254 bytes, and at least one. The zero delimiter is not included. */
#define PROTO_COBS_MAX(n) ((n) + (n) / 254u + 1u)

/* proto_cobs_encode writes the COBS encoding of src[0..n) to dst (no zero
 * delimiter). Returns the encoded length, or 0 if dst_cap is too small. */
size_t proto_cobs_encode(const uint8_t *src, size_t n, uint8_t *dst, size_t dst_cap);

/* Result codes of proto_cobs_decode. */
enum proto_cobs_result {
    PROTO_COBS_OK = 0,
    PROTO_COBS_EMPTY = -1,    /* no bytes between two delimiters */
    PROTO_COBS_ZERO = -2,     /* a zero byte inside the encoded block */
    PROTO_COBS_SHORT = -3,    /* a code byte points past the end of the block */
    PROTO_COBS_OVERFLOW = -4  /* decoded data does not fit dst_cap */
};

/* proto_cobs_decode decodes one COBS block src[0..n) (without its delimiter)
 * into dst and stores the decoded length in *out_len. Returns PROTO_COBS_OK or
 * one of the negative codes above; on error *out_len is 0. */
int proto_cobs_decode(const uint8_t *src, size_t n, uint8_t *dst, size_t dst_cap,
                     size_t *out_len);

/* Little-endian packing. The byte order is spelled out with shifts so the
 * result is the same on any host, whatever its own endianness. */
void proto_put_u16(uint8_t *p, uint16_t v);
void proto_put_u32(uint8_t *p, uint32_t v);
void proto_put_u64(uint8_t *p, uint64_t v);
void proto_put_f32(uint8_t *p, float v);
uint16_t proto_get_u16(const uint8_t *p);
uint32_t proto_get_u32(const uint8_t *p);
uint64_t proto_get_u64(const uint8_t *p);
float proto_get_f32(const uint8_t *p);

/* ---- frames and messages (docs/protocol.md sections 2, 3 and 5) ---------- */

/* The protocol version this code speaks, and the only one: a rig serves a
 * firmware in the version of its greeting (section 8), so a firmware needs
 * only one. Version 2 is version 1 with the watchdog in the config. */
#define PROTO_VERSION 2u
#define PROTO_MAX_JOINTS 8   /* array slots in config, state and command */
#define PROTO_STR_LEN 32     /* bytes of a str32 field on the wire */
#define PROTO_HEADER_LEN 8   /* version, type, seq, length */
#define PROTO_OVERHEAD 10    /* header plus CRC */
#define PROTO_MAX_FRAME 512  /* no frame of any version is longer */

/* Message types (section 3). */
enum proto_type {
    PROTO_GREETING = 0x01,
    PROTO_CONFIG = 0x02,
    PROTO_STATE = 0x10,
    PROTO_COMMAND = 0x11,
    PROTO_HEARTBEAT = 0x20,
    PROTO_STOP = 0x30
};

/* Fixed payload length of each type (section 3). */
enum proto_payload_len {
    PROTO_GREETING_LEN = 66,
    PROTO_CONFIG_LEN = 296, /* version 2: 292 bytes of version 1, then watchdog_us */
    PROTO_STATE_LEN = 84,
    PROTO_COMMAND_LEN = 36,
    PROTO_HEARTBEAT_LEN = 0,
    PROTO_STOP_LEN = 33
};

/* Stop reason codes (section 3.6). Unknown codes are accepted. */
enum proto_stop_reason {
    PROTO_STOP_END = 0,
    PROTO_STOP_ESTOP = 1,
    PROTO_STOP_WATCHDOG = 2,
    PROTO_STOP_ABORTED = 3,
    PROTO_STOP_FIRMWARE = 4,
    PROTO_STOP_BAD_VERSION = 5,
    PROTO_STOP_MISMATCH = 6
};

/* Contact bits in proto_state.contacts and status bits in
 * proto_command.status. */
#define PROTO_CONTACT_LEFT 0x01u
#define PROTO_CONTACT_RIGHT 0x02u
#define PROTO_STATUS_FAULT 0x0001u
#define PROTO_STATUS_SAFE_MODE 0x0002u

/* Text fields hold up to 32 bytes plus a terminating zero for C's sake; the
 * terminator is not sent. */
struct proto_greeting {
    uint8_t version;
    uint8_t actuators;
    char name[PROTO_STR_LEN + 1];
    char build[PROTO_STR_LEN + 1];
};

struct proto_config {
    uint16_t tick_hz;
    uint8_t lockstep; /* 1 lockstep, 0 wall-clock */
    uint8_t joints;
    char joint_names[PROTO_MAX_JOINTS][PROTO_STR_LEN + 1];
    float torque_limit[PROTO_MAX_JOINTS];
    /* The watchdog the rig enforces, in microseconds (section 3.2): how
     * long the rig waits for a valid command before it e-stops. Never 0. */
    uint32_t watchdog_us;
};

struct proto_state {
    uint64_t time_us;
    uint8_t joints;
    uint8_t contacts;
    float angle[PROTO_MAX_JOINTS];
    float rate[PROTO_MAX_JOINTS];
    float imu_pitch;
    float imu_rate;
};

struct proto_command {
    uint8_t joints;
    uint16_t status;
    float torque[PROTO_MAX_JOINTS];
};

struct proto_stop {
    uint8_t reason;
    char text[PROTO_STR_LEN + 1];
};

/* One message. Only the member of u that matches type is meaningful. On
 * decode, version is the header's version byte; on encode it is ignored and
 * PROTO_VERSION is sent. */
struct proto_message {
    uint8_t version;
    uint8_t type;
    uint32_t seq;
    union {
        struct proto_greeting greeting;
        struct proto_config config;
        struct proto_state state;
        struct proto_command command;
        struct proto_stop stop;
    } u;
};

/* Result codes of proto_encode and proto_decode, in the order of the checks
 * of section 5. */
enum proto_result {
    PROTO_OK = 0,
    PROTO_ERR_TRUNCATED = 1,  /* under 10 bytes, or fewer than length says */
    PROTO_ERR_TOO_LONG = 2,   /* over 512 bytes */
    PROTO_ERR_EXTRA = 3,      /* more bytes than length says */
    PROTO_ERR_CRC = 4,        /* stored CRC differs from the computed one */
    PROTO_ERR_VERSION = 5,    /* header version is not PROTO_VERSION */
    PROTO_ERR_TYPE = 6,       /* unknown message type */
    PROTO_ERR_LENGTH = 7,     /* length is not the fixed length of the type */
    PROTO_ERR_FIELD = 8,      /* a field out of its range */
    PROTO_ERR_BUFFER = 9,     /* encode: output buffer too small */
    PROTO_ERR_COBS = 10       /* byte stream: bad COBS block */
};

/* Details of a refused frame, for an error message a person understands.
 * The meaning of got and want depends on the code: payload bytes that
 * arrived and the length the frame claims (TRUNCATED, EXTRA), stored and
 * computed CRC (CRC), the frame's version and ours (VERSION), the type byte
 * (TYPE), the length and the type's fixed length (LENGTH). For FIELD, field
 * names the field. */
struct proto_diag {
    unsigned long got;
    unsigned long want;
    const char *field;
};

/* proto_encode writes the frame of m (header, payload, CRC) to out and stores
 * its length in *len. Fields are checked as a receiver would check them, so
 * a frame this writes is never refused for its contents. */
int proto_encode(const struct proto_message *m, uint8_t *out, size_t cap, size_t *len);

/* proto_decode checks and decodes one frame (without COBS) into *m. On
 * failure it returns the first failed check of section 5 and, if diag is not
 * NULL, fills *diag. */
int proto_decode(const uint8_t *frame, size_t n, struct proto_message *m,
                 struct proto_diag *diag);

/* proto_write_frame is proto_encode followed by COBS and the zero delimiter:
 * the bytes to put on a serial line. */
int proto_write_frame(const struct proto_message *m, uint8_t *out, size_t cap, size_t *len);

/* proto_error_text names a result code in a few words. */
const char *proto_error_text(int code);

/* proto_stop_reason_text names a stop reason code ("end", "watchdog", ...),
 * or "unknown" for a code this version does not know. */
const char *proto_stop_reason_text(uint8_t reason);

#endif /* GAITRIG_PROTO_H */
