/*
 * main_posix.c - the thin POSIX shim that runs the example firmware on a host
 * against a serial device (a real UART or one end of a pseudo-terminal pair).
 *
 * Everything that touches the operating system lives here: opening the tty,
 * raw mode, the read loop, the clock, the log lines and the exit status. The
 * protocol (protocol.c) and the control law (controller.c) do no I/O, so a
 * port to a microcontroller replaces only this file (see README.md).
 *
 * Usage: gaitrig-cfw [-v] [-j 1|2|3|4] [--once] TTY
 *
 *   -v     also log the configuration (refused frames are always logged)
 *   -j N   actuators to announce: 2 (default, a walker with a torso and
 *          joints hip_left, hip_right) or 1 (a compass walker, joint hip);
 *          4 or 3 for the same walkers with actuated knees (knee_left,
 *          knee_right), which this firmware leaves passive (zero torque)
 *   --once exit after the first stop instead of greeting again (a one-shot
 *          build for tests that read the exit status and counters of one
 *          run; the conformance battery fails it on greets_after_restart)
 *
 * It follows the session of docs/protocol.md section 6: a zero byte when the
 * line opens, a greeting repeated every 500 ms until a config arrives, one
 * command per state, a heartbeat after 100 ms without sending, and after a
 * stop (the rig's, or its own refusal) back to greeting for the next rig, as
 * a board does (section 6 item 5); with --once, an exit on stop.
 *
 * Exit status: with --once, 0 after a stop with reason "end" from the rig; 1
 * after any other stop reason, a frame of another protocol version or a
 * config it cannot drive (without --once these end only the session). Either
 * way 1 after a link closed under it, a rig silent after its config for 20 of the
 * watchdogs its config announced and at least 10 s (controller.c,
 * ctl_link_state; a silence beyond one watchdog is logged and counted as
 * "quiet"), or
 * SIGINT/SIGTERM (after sending a stop with reason "firmware"); 2 for bad
 * usage or a tty that cannot be opened. On every exit after the tty opened it prints
 * one line of counters to stderr, starting "cfw: counters", which the
 * end-to-end test reads.
 */
#define _POSIX_C_SOURCE 200809L

#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <termios.h>
#include <time.h>
#include <unistd.h>

#include "controller.h"
#include "protocol.h"

#define FIRMWARE_NAME "gaitrig-example-c"
#define FIRMWARE_BUILD "c99 protocol v2"

/* Session timing of docs/protocol.md section 6. */
#define GREETING_REPEAT_MS 500
#define HEARTBEAT_MS 100
/* A receiver that collects more than this without a zero drops the bytes
 * (section 4): the COBS size of a 512-byte frame. */
#define RX_LIMIT PROTO_COBS_MAX(PROTO_MAX_FRAME)

/* What happened on the link, for the counters line. */
struct counters {
    unsigned long bytes_in;
    unsigned long bytes_out;
    unsigned long frames_in;    /* valid frames received */
    unsigned long frames_out;   /* frames sent */
    unsigned long frame_errors; /* refused frames: COBS, size, CRC, version, type, fields */
    unsigned long unexpected;   /* valid frames of a type the rig should not send us */
    unsigned long states;
    unsigned long commands;
    unsigned long repeats;      /* states received again with the same seq */
    unsigned long skipped;      /* states left unanswered: superseded by a newer one, or before a config */
    unsigned long heartbeats_in;
    unsigned long heartbeats_out;
    unsigned long greetings;
    unsigned long quiet;        /* silences of the rig longer than its watchdog */
    unsigned long sessions;     /* sessions ended by a stop (either side's) */
};

struct link {
    int fd;
    int verbose;
    int actuators; /* announced in the greeting: 2 torso walker, 1 compass, +2 with knees */
    int once;      /* --once: exit after the first stop instead of greeting again */
    struct counters n;
    uint8_t rx[RX_LIMIT];
    size_t rx_len;
    int rx_overlong;
    uint32_t last_state_seq; /* seq of heartbeat and stop frames (section 6) */
    long last_tx_ms;         /* when we last sent a frame, for heartbeats */
};

/* Set by SIGINT or SIGTERM: the loop sees it when poll or read returns with
 * EINTR, tells the rig, prints its counters and exits. The only global of
 * the shim, as a signal handler can reach nothing else. */
static volatile sig_atomic_t interrupted;

static void on_signal(int sig)
{
    (void)sig;
    interrupted = 1;
}

static long now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (long)ts.tv_sec * 1000L + ts.tv_nsec / 1000000L;
}

static void print_counters(const struct link *l, const char *end)
{
    fprintf(stderr,
            "cfw: counters bytes_in=%lu bytes_out=%lu frames_in=%lu frames_out=%lu "
            "frame_errors=%lu unexpected=%lu states=%lu commands=%lu repeats=%lu skipped=%lu "
            "heartbeats_in=%lu heartbeats_out=%lu greetings=%lu quiet=%lu sessions=%lu end=%s\n",
            l->n.bytes_in, l->n.bytes_out, l->n.frames_in, l->n.frames_out, l->n.frame_errors,
            l->n.unexpected, l->n.states, l->n.commands, l->n.repeats, l->n.skipped,
            l->n.heartbeats_in,
            l->n.heartbeats_out, l->n.greetings, l->n.quiet, l->n.sessions, end);
}

/* describe_error writes the refusal in the words of docs/protocol.md
 * section 5, with the numbers that caused it. */
static void describe_error(int rc, const struct proto_diag *d, char *buf, size_t cap)
{
    switch (rc) {
    case PROTO_ERR_TRUNCATED:
        if (d->want == PROTO_OVERHEAD) {
            snprintf(buf, cap, "truncated (%lu bytes, a frame has at least 10)", d->got);
        } else {
            snprintf(buf, cap, "truncated (frame says %lu payload bytes, %lu arrived)", d->want,
                     d->got);
        }
        break;
    case PROTO_ERR_TOO_LONG:
        snprintf(buf, cap, "too long (%lu bytes, at most 512)", d->got);
        break;
    case PROTO_ERR_EXTRA:
        snprintf(buf, cap, "length mismatch (%lu extra bytes)", d->got);
        break;
    case PROTO_ERR_CRC:
        snprintf(buf, cap, "bad CRC: got 0x%04lX, computed 0x%04lX", d->got, d->want);
        break;
    case PROTO_ERR_VERSION:
        snprintf(buf, cap,
                 "wrong protocol version: frame speaks version %lu, this side speaks version %lu",
                 d->got, d->want);
        break;
    case PROTO_ERR_TYPE:
        snprintf(buf, cap, "unknown message type 0x%02lX", d->got);
        break;
    case PROTO_ERR_LENGTH:
        snprintf(buf, cap, "length mismatch (payload %lu bytes, the type has %lu)", d->got,
                 d->want);
        break;
    case PROTO_ERR_FIELD:
        snprintf(buf, cap, "%s out of range (%lu)", d->field ? d->field : "a field", d->got);
        break;
    default:
        snprintf(buf, cap, "%s", proto_error_text(rc));
        break;
    }
}

/* raw_mode puts the tty into the state of a plain UART: 8 data bits, no
 * echo, no line editing, no translation of CR, LF or the zero byte, reads
 * that return as soon as one byte is there. cfmakeraw is not POSIX, so the
 * flags are cleared one by one. */
static int raw_mode(int fd)
{
    struct termios t;
    if (tcgetattr(fd, &t) != 0) {
        return -1;
    }
    t.c_iflag &= ~(tcflag_t)(IGNBRK | BRKINT | PARMRK | ISTRIP | INLCR | IGNCR | ICRNL | IXON |
                             IXOFF | INPCK);
    t.c_oflag &= ~(tcflag_t)OPOST;
    t.c_lflag &= ~(tcflag_t)(ECHO | ECHONL | ICANON | ISIG | IEXTEN);
    t.c_cflag &= ~(tcflag_t)(CSIZE | PARENB | CSTOPB);
    t.c_cflag |= (tcflag_t)(CS8 | CREAD | CLOCAL);
    t.c_cc[VMIN] = 1;
    t.c_cc[VTIME] = 0;
    /* Meaningless on a pty; on a real UART 115200 baud is common practice
     * for small boards. */
    cfsetispeed(&t, B115200);
    cfsetospeed(&t, B115200);
    return tcsetattr(fd, TCSANOW, &t);
}

static int write_all(struct link *l, const uint8_t *p, size_t n)
{
    while (n > 0) {
        ssize_t w = write(l->fd, p, n);
        if (w < 0) {
            if (errno == EINTR || errno == EAGAIN) {
                continue;
            }
            fprintf(stderr, "cfw: write failed: %s\n", strerror(errno));
            return -1;
        }
        p += (size_t)w;
        n -= (size_t)w;
        l->n.bytes_out += (unsigned long)w;
    }
    return 0;
}

/* send_message COBS-frames and writes one message. */
static int send_message(struct link *l, const struct proto_message *m)
{
    uint8_t out[PROTO_COBS_MAX(PROTO_MAX_FRAME) + 1];
    size_t len = 0;
    int rc = proto_write_frame(m, out, sizeof out, &len);
    if (rc != PROTO_OK) {
        fprintf(stderr, "cfw: cannot encode message type 0x%02X: %s\n", (unsigned)m->type,
                proto_error_text(rc));
        return -1;
    }
    if (write_all(l, out, len) != 0) {
        return -1;
    }
    l->n.frames_out++;
    l->last_tx_ms = now_ms();
    return 0;
}

static int send_greeting(struct link *l)
{
    struct proto_message m;
    memset(&m, 0, sizeof m);
    m.type = PROTO_GREETING;
    m.seq = 0; /* section 6: a greeting has seq 0 */
    m.u.greeting.version = PROTO_VERSION;
    m.u.greeting.actuators = (uint8_t)l->actuators;
    strcpy(m.u.greeting.name, FIRMWARE_NAME);
    strcpy(m.u.greeting.build, FIRMWARE_BUILD);
    l->n.greetings++;
    return send_message(l, &m);
}

static int send_heartbeat(struct link *l)
{
    struct proto_message m;
    memset(&m, 0, sizeof m);
    m.type = PROTO_HEARTBEAT;
    m.seq = l->last_state_seq;
    l->n.heartbeats_out++;
    return send_message(l, &m);
}

/* copy_text copies at most PROTO_STR_LEN bytes of a C string into a str32
 * field's buffer and terminates it: longer details are cut, not refused. */
static void copy_text(char dst[PROTO_STR_LEN + 1], const char *src)
{
    size_t i;
    for (i = 0; i < PROTO_STR_LEN && src[i] != '\0'; i++) {
        dst[i] = src[i];
    }
    dst[i] = '\0';
}

static int send_stop(struct link *l, uint8_t reason, const char *text)
{
    struct proto_message m;
    memset(&m, 0, sizeof m);
    m.type = PROTO_STOP;
    m.seq = l->last_state_seq;
    m.u.stop.reason = reason;
    copy_text(m.u.stop.text, text);
    return send_message(l, &m);
}

/* Outcome of handling one frame. */
enum outcome { KEEP_GOING, STOPPED_NORMAL, STOPPED_OTHER, LINK_FAILED };

struct session {
    int configured;
    struct ctl_config cfg;
    /* The last command sent, so a state that arrives again with the same seq
     * (a lockstep rig resends a state it thinks was lost) gets the same
     * answer without running the law again. */
    int have_last;
    struct proto_message last;
    /* The newest state of the bytes read so far, answered once the read
     * buffer has been split. A wall-clock rig that got ahead of us may have
     * several states waiting; section 7 asks for an answer to the newest
     * and none to the older ones. In lockstep there is one at a time. */
    int have_pending;
    struct proto_message pending;
    /* Set while the rig has been silent for longer than its watchdog
     * (ctl_link_state says CTL_LINK_QUIET); cleared by its next frame. */
    int quiet;
};

static enum outcome on_config(struct link *l, struct session *s, const struct proto_config *c)
{
    const char *why = ctl_configure(&s->cfg, c, l->actuators);
    if (why != NULL) {
        /* We cannot drive this rig: say so and leave rather than send
         * torques to joints we do not understand. */
        fprintf(stderr, "cfw: refusing the rig's configuration: %s\n", why);
        send_stop(l, PROTO_STOP_FIRMWARE, why);
        return STOPPED_OTHER;
    }
    s->configured = 1;
    s->have_last = 0;
    if (s->have_pending) {
        l->n.skipped++; /* a state from before this config: not ours to answer */
        s->have_pending = 0;
    }
    if (l->verbose) {
        fprintf(stderr, "cfw: configured: %u Hz, %s, %u joints, watchdog %lu us\n",
                (unsigned)c->tick_hz, c->lockstep ? "lockstep" : "wall-clock",
                (unsigned)c->joints, (unsigned long)c->watchdog_us);
    }
    return KEEP_GOING;
}

static enum outcome on_state(struct link *l, struct session *s, const struct proto_message *m)
{
    l->n.states++;
    if (!s->configured) {
        /* A state before any config: the rig missed the config exchange.
         * Section 6 forbids commands before a config; the greeting repeats
         * on its timer. */
        l->n.skipped++;
        return KEEP_GOING;
    }
    if (s->have_pending) {
        l->n.skipped++;
    }
    /* Heartbeats and stops carry the seq of the latest state received
     * (section 6), answered or not. */
    l->last_state_seq = m->seq;
    s->pending = *m;
    s->have_pending = 1;
    return KEEP_GOING;
}

/* answer_pending answers the newest state received, if any. */
static enum outcome answer_pending(struct link *l, struct session *s)
{
    const struct proto_message *m = &s->pending;
    if (!s->have_pending) {
        return KEEP_GOING;
    }
    s->have_pending = 0;
    if (s->have_last && m->seq == s->last.seq) {
        l->n.repeats++;
        if (send_message(l, &s->last) != 0) {
            return LINK_FAILED;
        }
        l->n.commands++;
        return KEEP_GOING;
    }
    memset(&s->last, 0, sizeof s->last);
    s->last.type = PROTO_COMMAND;
    s->last.seq = m->seq; /* a command echoes its state's seq */
    if (m->u.state.joints != s->cfg.joints) {
        /* The rig broke its own config: answer with our safe state and
         * flag it, rather than read joints at the wrong slots. */
        ctl_safe(&s->cfg, &s->last.u.command);
        s->last.u.command.status = PROTO_STATUS_FAULT | PROTO_STATUS_SAFE_MODE;
        fprintf(stderr, "cfw: state seq %lu has %u joints, config said %u\n",
                (unsigned long)m->seq, (unsigned)m->u.state.joints, (unsigned)s->cfg.joints);
    } else {
        ctl_step(&s->cfg, &m->u.state, &s->last.u.command);
    }
    s->have_last = 1;
    if (send_message(l, &s->last) != 0) {
        return LINK_FAILED;
    }
    l->n.commands++;
    return KEEP_GOING;
}

static enum outcome handle(struct link *l, struct session *s, const struct proto_message *m)
{
    switch (m->type) {
    case PROTO_CONFIG:
        return on_config(l, s, &m->u.config);
    case PROTO_STATE:
        return on_state(l, s, m);
    case PROTO_HEARTBEAT:
        l->n.heartbeats_in++;
        return KEEP_GOING;
    case PROTO_STOP:
        fprintf(stderr, "cfw: the rig sent stop, reason %u (%s): %s\n",
                (unsigned)m->u.stop.reason, proto_stop_reason_text(m->u.stop.reason),
                m->u.stop.text);
        return m->u.stop.reason == PROTO_STOP_END ? STOPPED_NORMAL : STOPPED_OTHER;
    default:
        /* A greeting or a command sent to us: a valid frame, but one only
         * a firmware sends. Count it and carry on. */
        l->n.unexpected++;
        fprintf(stderr, "cfw: ignoring message type 0x%02X from the rig\n", (unsigned)m->type);
        return KEEP_GOING;
    }
}

/* reject counts a refused frame and logs it. A noisy line can refuse
 * thousands of frames a second, so after the first 20 only every 1000th is
 * logged; the counter keeps the exact number. */
static void reject(struct link *l, const char *why)
{
    l->n.frame_errors++;
    if (l->n.frame_errors <= 20 || l->n.frame_errors % 1000 == 0) {
        fprintf(stderr, "cfw: rejected frame: %s (%lu refused so far)\n", why,
                l->n.frame_errors);
    }
    if (l->n.frame_errors == 20) {
        fprintf(stderr, "cfw: from now on only every 1000th refused frame is logged\n");
    }
}

/* on_block handles the bytes between two zero delimiters. */
static enum outcome on_block(struct link *l, struct session *s)
{
    uint8_t raw[PROTO_MAX_FRAME];
    size_t raw_len = 0;
    struct proto_message m;
    struct proto_diag diag;
    char why[128];
    int rc;

    if (l->rx_overlong) {
        snprintf(why, sizeof why, "too long (more than %u bytes without a zero)",
                 (unsigned)RX_LIMIT);
        reject(l, why);
        return KEEP_GOING;
    }
    if (l->rx_len == 0) {
        return KEEP_GOING; /* two zeros in a row: ignored silently (section 4) */
    }
    rc = proto_cobs_decode(l->rx, l->rx_len, raw, sizeof raw, &raw_len);
    if (rc == PROTO_COBS_OVERFLOW) {
        reject(l, "too long (decodes to over 512 bytes)");
        return KEEP_GOING;
    }
    if (rc != PROTO_COBS_OK) {
        /* The block holds no zero (the zeros split the stream), so the only
         * COBS fault left is a code byte that runs past the end. */
        snprintf(why, sizeof why, "bad COBS (a code byte runs past the end of %lu bytes)",
                 (unsigned long)l->rx_len);
        reject(l, why);
        return KEEP_GOING;
    }
    rc = proto_decode(raw, raw_len, &m, &diag);
    if (rc != PROTO_OK) {
        describe_error(rc, &diag, why, sizeof why);
        reject(l, why);
        if (rc == PROTO_ERR_VERSION) {
            /* Section 8: a firmware that gets a frame of a version it does
             * not speak stops and tells its user. */
            snprintf(why, sizeof why, "firmware v%u, rig v%lu", (unsigned)PROTO_VERSION,
                     diag.got);
            send_stop(l, PROTO_STOP_BAD_VERSION, why);
            return STOPPED_OTHER;
        }
        return KEEP_GOING;
    }
    l->n.frames_in++;
    return handle(l, s, &m);
}

static int finish(struct link *l, const char *end, int status)
{
    print_counters(l, end);
    return status;
}

static int run(struct link *l)
{
    static struct session s; /* static: keeps the stack small */
    uint8_t buf[512];
    long last_rx = now_ms();
    long last_greeting;
    static const uint8_t opening_zero[1] = {0};

    memset(&s, 0, sizeof s);
    /* Section 4: one zero when the line opens, so the rig drops whatever
     * half frame or noise came before. */
    if (write_all(l, opening_zero, 1) != 0 || send_greeting(l) != 0) {
        return finish(l, "write-failed", 1);
    }
    last_greeting = now_ms();

    for (;;) {
        struct pollfd p;
        long t;
        int pr, timeout;
        ssize_t got, i;

        /* Sleep until the next thing we must send, or until bytes come. */
        t = now_ms();
        if (s.configured) {
            timeout = (int)(HEARTBEAT_MS - (t - l->last_tx_ms));
        } else {
            timeout = (int)(GREETING_REPEAT_MS - (t - last_greeting));
        }
        if (timeout < 0) {
            timeout = 0;
        }
        p.fd = l->fd;
        p.events = POLLIN;
        p.revents = 0;
        pr = poll(&p, 1, timeout);
        t = now_ms();
        if (interrupted) {
            /* Tell the rig why we leave, so its run ends with a reason
             * instead of a watchdog trip. */
            fprintf(stderr, "cfw: interrupted, sending stop\n");
            send_stop(l, PROTO_STOP_FIRMWARE, "firmware interrupted");
            return finish(l, "interrupted", 1);
        }
        if (pr < 0 && errno != EINTR) {
            fprintf(stderr, "cfw: poll failed: %s\n", strerror(errno));
            return finish(l, "poll-failed", 1);
        }
        /* Timers run whether or not bytes came: a line with noise on it
         * must not hold back the greeting or the heartbeat. */
        if (!s.configured && t - last_greeting >= GREETING_REPEAT_MS) {
            if (send_greeting(l) != 0) {
                return finish(l, "write-failed", 1);
            }
            last_greeting = t;
        } else if (s.configured && t - l->last_tx_ms >= HEARTBEAT_MS) {
            if (send_heartbeat(l) != 0) {
                return finish(l, "write-failed", 1);
            }
        }
        if (pr <= 0) {
            /* Before a config the firmware waits for a rig as long as it
             * takes, as a board on the bench does; once configured, the
             * rig's own watchdog says how long a silence may be
             * (controller.c decides, so a board port shares the rule). */
            if (s.configured) {
                long silent = t - last_rx;
                switch (ctl_link_state(&s.cfg, silent > 0 ? (uint32_t)silent : 0u)) {
                case CTL_LINK_LOST:
                    fprintf(stderr,
                            "cfw: the rig has been silent for %ld ms (its watchdog is %lu us), "
                            "giving up\n",
                            silent, (unsigned long)s.cfg.watchdog_us);
                    return finish(l, "silence", 1);
                case CTL_LINK_QUIET:
                    if (!s.quiet) {
                        /* A board would put its motor outputs to the safe
                         * state here; this host shim has none, so it only
                         * says so. Nothing is sent: the rig needs no
                         * command until it sends a state again. */
                        s.quiet = 1;
                        l->n.quiet++;
                        fprintf(stderr,
                                "cfw: no frame from the rig for %ld ms, beyond its watchdog of "
                                "%lu us: holding the safe state\n",
                                silent, (unsigned long)s.cfg.watchdog_us);
                    }
                    break;
                default:
                    break;
                }
            }
            continue;
        }
        got = read(l->fd, buf, sizeof buf);
        if (got < 0 && (errno == EINTR || errno == EAGAIN)) {
            continue;
        }
        if (got <= 0) {
            /* On a pty, EIO or end of file means the rig closed its end:
             * the cable was pulled. */
            fprintf(stderr, "cfw: the rig closed the link (%s)\n",
                    got < 0 ? strerror(errno) : "end of file");
            return finish(l, "link-closed", 1);
        }
        last_rx = t;
        s.quiet = 0;
        l->n.bytes_in += (unsigned long)got;
        for (i = 0; i < got; i++) {
            enum outcome r;
            if (buf[i] != 0) {
                if (l->rx_len < sizeof l->rx) {
                    l->rx[l->rx_len++] = buf[i];
                } else {
                    l->rx_overlong = 1;
                }
                continue;
            }
            r = on_block(l, &s);
            l->rx_len = 0;
            l->rx_overlong = 0;
            if (r == STOPPED_NORMAL || r == STOPPED_OTHER) {
                l->n.sessions++;
                if (l->once) {
                    return r == STOPPED_NORMAL ? finish(l, "stop", 0) : finish(l, "stop-other", 1);
                }
                /* Section 6 item 5: the session is over, the board is not.
                 * Forget the config (a state that follows in the same read
                 * is then ignored as one before a config) and greet again
                 * one period from now, for the next rig. */
                memset(&s, 0, sizeof s);
                l->last_state_seq = 0; /* heartbeats of the next session: 0 before its first state */
                last_greeting = t;
                fprintf(stderr, "cfw: session %lu over, greeting again\n", l->n.sessions);
            } else if (r == LINK_FAILED) {
                return finish(l, "write-failed", 1);
            }
        }
        if (answer_pending(l, &s) != KEEP_GOING) {
            return finish(l, "write-failed", 1);
        }
    }
}

static int usage(const char *prog)
{
    fprintf(stderr, "usage: %s [-v] [-j 1|2|3|4] [--once] TTY\n", prog);
    return 2;
}

int main(int argc, char **argv)
{
    static struct link l; /* static: the receive buffer is too big for some stacks */
    const char *path = NULL;
    int i, rc;

    l.actuators = 2;
    for (i = 1; i < argc; i++) {
        if (strcmp(argv[i], "-v") == 0) {
            l.verbose = 1;
        } else if (strcmp(argv[i], "--once") == 0) {
            l.once = 1;
        } else if (strcmp(argv[i], "-j") == 0 && i + 1 < argc) {
            i++;
            if (strcmp(argv[i], "1") == 0) {
                l.actuators = 1;
            } else if (strcmp(argv[i], "2") == 0) {
                l.actuators = 2;
            } else if (strcmp(argv[i], "3") == 0) {
                l.actuators = 3;
            } else if (strcmp(argv[i], "4") == 0) {
                l.actuators = 4;
            } else {
                fprintf(stderr, "cfw: -j %s: this firmware drives 1 to 4 joints\n", argv[i]);
                return usage(argv[0]);
            }
        } else if (argv[i][0] == '-' || path != NULL) {
            return usage(argv[0]);
        } else {
            path = argv[i];
        }
    }
    if (path == NULL) {
        return usage(argv[0]);
    }
    l.fd = open(path, O_RDWR | O_NOCTTY);
    if (l.fd < 0) {
        fprintf(stderr, "cfw: cannot open %s: %s\n", path, strerror(errno));
        return 2;
    }
    if (raw_mode(l.fd) != 0) {
        fprintf(stderr, "cfw: cannot set raw mode on %s: %s\n", path, strerror(errno));
        close(l.fd);
        return 2;
    }
    {
        /* No SA_RESTART: poll and read must return EINTR so the loop sees
         * the flag at once. */
        struct sigaction sa;
        memset(&sa, 0, sizeof sa);
        sa.sa_handler = on_signal;
        sigemptyset(&sa.sa_mask);
        sigaction(SIGINT, &sa, NULL);
        sigaction(SIGTERM, &sa, NULL);
    }
    rc = run(&l);
    close(l.fd);
    return rc;
}
