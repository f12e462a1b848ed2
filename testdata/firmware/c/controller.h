/*
 * controller.h - the walking control law of the example firmware, a C99 port
 * of the reference controller in firmware/reference (see controller.c for
 * the law and its constants).
 *
 * Pure computation: no OS calls, no malloc, no globals beyond const tables.
 * Everything the law remembers between ticks lives in struct ctl_memory,
 * which the caller owns, so the same code runs on a host and on a
 * microcontroller, and two instances never share state.
 */
#ifndef GAITRIG_CONTROLLER_H
#define GAITRIG_CONTROLLER_H

#include "protocol.h"

/* The law drives the two hip joints of a walker with a torso. */
#define CTL_ACTUATORS 2

/* What the law takes from the rig's configuration. */
struct ctl_config {
    float dt;                     /* s per tick, 1 / tick_hz */
    uint8_t joints;               /* joints in state and command */
    uint8_t slot_left;            /* slot of hip_left in state and command */
    uint8_t slot_right;           /* slot of hip_right */
    float limit[PROTO_MAX_JOINTS]; /* N·m, the rig's torque limit per slot */
};

/* Everything the law remembers between ticks. */
struct ctl_memory {
    int stance;            /* 0 left, 1 right: the leg that carries the walker */
    uint8_t last_contacts; /* contact bits of the previous tick */
    float time_in_step;    /* s since the last heel strike */
    float hold_off;        /* s left before a new heel strike is accepted */
    unsigned long steps;   /* heel strikes seen */
    int started;           /* 0 until the first state */
};

/* ctl_configure reads the joint order and limits from the rig's config. It
 * returns NULL on success, or a short reason (at most 32 bytes, to fit a
 * stop frame) why the law cannot drive this rig. */
const char *ctl_configure(struct ctl_config *cfg, const struct proto_config *rig);

/* ctl_reset puts the memory into its start-of-run state. */
void ctl_reset(const struct ctl_config *cfg, struct ctl_memory *mem);

/* ctl_step computes the command for one state. It never produces NaN or
 * infinite torques and clamps to the configured limits. */
void ctl_step(const struct ctl_config *cfg, struct ctl_memory *mem, const struct proto_state *s,
              struct proto_command *out);

/* ctl_safe fills out with the firmware's own safe state: zero torque on
 * every joint. */
void ctl_safe(const struct ctl_config *cfg, struct proto_command *out);

#endif /* GAITRIG_CONTROLLER_H */
