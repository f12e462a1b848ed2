/*
 * controller.h - the walking control law of the example firmware: an exact
 * C99 port of the reference law of gaitrig/firmware/reference (func Law and
 * the torque-limit rule of func Serve), with the same constants.
 *
 * Pure computation: no OS calls, no malloc, no globals beyond const tables.
 * The law has no memory between ticks (the same reading gives the same
 * torques), so the caller keeps nothing but the configuration.
 */
#ifndef GAITRIG_CONTROLLER_H
#define GAITRIG_CONTROLLER_H

#include "protocol.h"

/* Constants of the law, named and documented as in the Go Gains type. */
struct ctl_gains {
    double target_speed;    /* m/s, the forward speed the law regulates */
    double leg_length;      /* m, turns the stance leg rate into a speed */
    double step_angle;      /* rad, swing-leg target at the target speed */
    double step_speed_gain; /* rad per m/s, longer steps when fast */
    double step_min;        /* rad, bounds of the swing-leg target */
    double step_max;
    double swing_kp;        /* N·m/rad, swing hip PD on the absolute leg angle */
    double swing_kd;        /* N·m·s/rad */
    double lean;            /* rad, torso pitch held at the target speed */
    double lean_speed_gain; /* rad per m/s, leans further forward when slow */
    double lean_min;        /* rad, bounds of the pitch target */
    double lean_max;
    double torso_kp;        /* N·m/rad, stance hip PD on the torso pitch */
    double torso_kd;        /* N·m·s/rad */
    double torque_limit;    /* N·m, the firmware's own clip on every torque */
};

/* The tuned constants for the demo walker (Go: reference.DefaultGains). */
extern const struct ctl_gains ctl_default_gains;

/* One sensor reading in the units of the wire protocol (Go: Reading).
 * joints 2: angle[0] hip_left, angle[1] hip_right, pitch of the torso.
 * joints 1: angle[0] hip (right leg minus left leg), pitch of the left leg. */
struct ctl_reading {
    int joints;
    double angle[2];
    double rate[2];
    double pitch;
    double pitch_rate;
    uint8_t contacts; /* bit 0 left foot switch, bit 1 right */
};

/* ctl_law is the law itself (Go: Law): it writes reading->joints torques to
 * tau, in N·m, and returns the stance leg it chose (0 left, 1 right). For a
 * joint count other than 1 or 2 it writes zeros to tau[0] and tau[1]. */
int ctl_law(const struct ctl_gains *g, const struct ctl_reading *r, double tau[2]);

/* What the firmware keeps from the rig's configuration. */
struct ctl_config {
    struct ctl_gains gains; /* torque_limit lowered to the rig's limit */
    uint8_t joints;         /* 1 (compass walker) or 2 (torso walker) */
    uint8_t slot[2];        /* wire slot of law joint 0 and 1 */
    uint32_t watchdog_us;   /* the rig's watchdog, from the config */
    uint8_t lockstep;       /* 1 lockstep, 0 wall-clock, from the config */
    uint8_t hips;           /* joints the law drives: 1 or 2 (the rest are knees) */
    uint8_t knee_slot[2];   /* wire slot of knee_left, knee_right (kneed walkers) */
};

/* ctl_configure checks the rig's configuration against the actuator count
 * the firmware announced and finds the joints by name: "hip_left" and
 * "hip_right" for 2 actuators, "hip" for 1, in any slot order. A kneed
 * walker's actuated knees add "knee_left" and "knee_right": 4 actuators
 * (torso walker) or 3 (compass walker). This firmware leaves the knees
 * passive: it answers zero torque on them, and the walker's knee stops and
 * latches hold the legs straight where they must. It returns
 * NULL on success, or a short reason (at most 32 bytes, so it fits a stop
 * frame) why this firmware cannot drive the rig. As in the Go reference
 * firmware, the smallest configured torque limit replaces the law's own
 * limit when it is positive and lower. */
const char *ctl_configure(struct ctl_config *cfg, const struct proto_config *rig, int actuators);

/* ctl_step computes the command for one state: ctl_law on the state's
 * values, torques rounded to float32 in the rig's slot order. A state with
 * a NaN or infinite value gets zero torques and the fault and safe-mode
 * status bits instead (the Go law would pass the NaN on; a board should not
 * send what the rig is bound to reject). */
void ctl_step(const struct ctl_config *cfg, const struct proto_state *s, struct proto_command *out);

/* What a silence of the rig means to the firmware, judged against the
 * watchdog the rig announced in its config (docs/protocol.md section 7). */
enum ctl_link {
    CTL_LINK_OK = 0,    /* the rig spoke within its watchdog */
    CTL_LINK_QUIET = 1, /* silent for longer than the watchdog: the rig has
                         * e-stopped, lost the link or (lockstep) stalled;
                         * the firmware holds its safe state (zero torque)
                         * until a state arrives again */
    CTL_LINK_LOST = 2   /* silent for CTL_LOST_WATCHDOGS watchdogs and at
                         * least CTL_LOST_MIN_MS: the rig has gone */
};

/* A rig silent for this many of its watchdogs has gone, not paused; but
 * never before CTL_LOST_MIN_MS, because a lockstep rig on a loaded host may
 * stall for seconds without blaming the firmware (section 7), and a board
 * that gave up then would have to greet again, which the rig takes for a
 * reset. */
#define CTL_LOST_WATCHDOGS 20u
#define CTL_LOST_MIN_MS 10000u

/* ctl_link_state judges a silence of silent_ms milliseconds since the
 * rig's last frame. Pure arithmetic on the configured watchdog, so a board
 * calls it from its timer with its own clock. */
enum ctl_link ctl_link_state(const struct ctl_config *cfg, uint32_t silent_ms);

/* ctl_lost_ms is the silence, in milliseconds, after which ctl_link_state
 * says CTL_LINK_LOST: CTL_LOST_WATCHDOGS watchdogs, at least
 * CTL_LOST_MIN_MS, at most about 49 days (the largest uint32_t). */
uint32_t ctl_lost_ms(const struct ctl_config *cfg);

/* ctl_safe fills out with the firmware's own safe state: zero torque on
 * every joint. */
void ctl_safe(const struct ctl_config *cfg, struct proto_command *out);

#endif /* GAITRIG_CONTROLLER_H */
