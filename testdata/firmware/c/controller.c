/*
 * controller.c - the walking control law of the example firmware.
 *
 * INTERIM: the structure of the port (joint lookup, stance tracking, limits,
 * safe state) with a plain torso-balance and swing-placement law, until the
 * documented law of firmware/reference lands and is ported here exactly.
 */
#include "controller.h"

#include <math.h>
#include <string.h>

/* Gains of the interim law. */
static const float kTorsoP = 200.0f;  /* N·m/rad */
static const float kTorsoD = 20.0f;   /* N·m·s/rad */
static const float kSwingP = 60.0f;   /* N·m/rad */
static const float kSwingD = 4.0f;    /* N·m·s/rad */
static const float kStepAngle = 0.3f; /* rad, swing leg ahead of vertical at heel strike */
static const float kHoldOff = 0.15f;  /* s after a heel strike before the next is accepted */

static int name_is(const char *a, const char *b) { return strcmp(a, b) == 0; }

const char *ctl_configure(struct ctl_config *cfg, const struct proto_config *rig)
{
    int i, left = -1, right = -1;

    memset(cfg, 0, sizeof *cfg);
    if (rig->tick_hz == 0) {
        return "tick rate 0";
    }
    if (rig->joints != CTL_ACTUATORS) {
        return "need 2 joints: hip_left/right";
    }
    for (i = 0; i < rig->joints; i++) {
        if (name_is(rig->joint_names[i], "hip_left")) {
            left = i;
        } else if (name_is(rig->joint_names[i], "hip_right")) {
            right = i;
        }
        if (!(rig->torque_limit[i] > 0.0f) || !isfinite(rig->torque_limit[i])) {
            return "torque limit not > 0";
        }
        cfg->limit[i] = rig->torque_limit[i];
    }
    if (left < 0 || right < 0) {
        return "joints not hip_left, hip_right";
    }
    cfg->dt = 1.0f / (float)rig->tick_hz;
    cfg->joints = rig->joints;
    cfg->slot_left = (uint8_t)left;
    cfg->slot_right = (uint8_t)right;
    return NULL;
}

void ctl_reset(const struct ctl_config *cfg, struct ctl_memory *mem)
{
    (void)cfg;
    memset(mem, 0, sizeof *mem);
}

void ctl_safe(const struct ctl_config *cfg, struct proto_command *out)
{
    memset(out, 0, sizeof *out);
    out->joints = cfg->joints;
}

static float clampf(float v, float lim)
{
    if (!isfinite(v)) {
        return 0.0f;
    }
    if (v > lim) {
        return lim;
    }
    if (v < -lim) {
        return -lim;
    }
    return v;
}

void ctl_step(const struct ctl_config *cfg, struct ctl_memory *mem, const struct proto_state *s,
              struct proto_command *out)
{
    uint8_t slot[2];
    float leg[2], leg_rate[2];
    float torso = s->imu_pitch, torso_rate = s->imu_rate;
    float tau_swing, tau_torso, tau_stance;
    int st, sw, i;

    slot[0] = cfg->slot_left;
    slot[1] = cfg->slot_right;
    /* Absolute leg angle = joint angle + torso angle (joint = leg - torso). */
    for (i = 0; i < 2; i++) {
        leg[i] = s->angle[slot[i]] + torso;
        leg_rate[i] = s->rate[slot[i]] + torso_rate;
    }
    if (!mem->started) {
        mem->started = 1;
        /* Start on the foot that is down; with both down, the one behind. */
        if ((s->contacts & PROTO_CONTACT_LEFT) && !(s->contacts & PROTO_CONTACT_RIGHT)) {
            mem->stance = 0;
        } else if ((s->contacts & PROTO_CONTACT_RIGHT) && !(s->contacts & PROTO_CONTACT_LEFT)) {
            mem->stance = 1;
        } else {
            mem->stance = leg[0] < leg[1] ? 0 : 1;
        }
        mem->hold_off = kHoldOff;
    }
    st = mem->stance;
    sw = 1 - st;

    /* Heel strike: the swing foot's switch closes with the swing leg ahead. */
    mem->time_in_step += cfg->dt;
    if (mem->hold_off > 0.0f) {
        mem->hold_off -= cfg->dt;
    } else if ((s->contacts & (sw == 0 ? PROTO_CONTACT_LEFT : PROTO_CONTACT_RIGHT)) &&
               leg[sw] > leg[st]) {
        mem->stance = sw;
        mem->steps++;
        mem->time_in_step = 0.0f;
        mem->hold_off = kHoldOff;
        st = mem->stance;
        sw = 1 - st;
    }
    mem->last_contacts = s->contacts;

    tau_swing = kSwingP * (kStepAngle - leg[sw]) - kSwingD * leg_rate[sw];
    /* Torque on the torso is minus the sum of the two hip torques. */
    tau_torso = -kTorsoP * torso - kTorsoD * torso_rate;
    tau_stance = -tau_torso - tau_swing;

    memset(out, 0, sizeof *out);
    out->joints = cfg->joints;
    out->torque[slot[sw]] = clampf(tau_swing, cfg->limit[slot[sw]]);
    out->torque[slot[st]] = clampf(tau_stance, cfg->limit[slot[st]]);
}
