/*
 * controller.c - exact C99 port of the reference control law (Go:
 * gaitrig/firmware/reference, func Law, and the torque-limit rule of func
 * Serve). The law, as its Go documentation states it, for the torso walker:
 *
 *   θT = pitch, ωT = pitch rate                       torso angle and rate
 *   θL = angle[0] + θT, ωL = rate[0] + ωT            absolute left leg
 *   θR = angle[1] + θT, ωR = rate[1] + ωT            absolute right leg
 *   stance st from the foot switches: left only → 0, right only → 1,
 *     both → the leg further forward (larger θ; ties 0), none → the leg
 *     rotating backward faster (smaller ω; ties 0); sw = 1 − st
 *   v = −leg_length·ω_st, e = v − target_speed
 *   φ* = clamp(step_angle + step_speed_gain·e, step_min, step_max)
 *   τ_sw = swing_kp·(φ* − θ_sw) − swing_kd·ω_sw       swing hip
 *   θT* = clamp(lean + lean_speed_gain·e, lean_min, lean_max)
 *   τ_st = torso_kp·(θT − θT*) + torso_kd·ωT − τ_sw   stance hip
 *   both clipped to ±torque_limit
 *
 * and for the compass walker (one joint, IMU on the left leg) θL = pitch,
 * θR = angle[0] + pitch, and the one hip torque is τ_sw, negated when the
 * left leg swings.
 *
 * The arithmetic is done in double, in the same order as the Go code, and
 * clamp follows Go's math.Min(math.Max(x, lo), hi) to the last bit, so the
 * same reading gives bit-identical torques in C and Go (the end-to-end test
 * checks this on seeded readings). C's fmin and fmax differ from Go's for
 * NaN and signed zeros, hence go_min and go_max below.
 */
#include "controller.h"

#include <math.h>
#include <string.h>

/* Go: reference.DefaultGains, tuned there for plant.DemoParams. */
const struct ctl_gains ctl_default_gains = {
    0.8,   /* target_speed */
    0.9,   /* leg_length */
    0.30,  /* step_angle */
    0.15,  /* step_speed_gain */
    0.15,  /* step_min */
    0.45,  /* step_max */
    80,    /* swing_kp */
    10,    /* swing_kd */
    -0.10, /* lean */
    0.3,   /* lean_speed_gain */
    -0.35, /* lean_min */
    0.05,  /* lean_max */
    400,   /* torso_kp */
    40,    /* torso_kd */
    50     /* torque_limit */
};

/* go_max and go_min are Go's math.Max and math.Min: an infinity of the
 * matching sign wins, then NaN, then +0 beats -0 (Max) or -0 beats +0
 * (Min). */
static double go_max(double x, double y)
{
    if ((isinf(x) && x > 0) || (isinf(y) && y > 0)) {
        return INFINITY;
    }
    if (isnan(x) || isnan(y)) {
        return NAN;
    }
    if (x == 0 && x == y) {
        return signbit(x) ? y : x;
    }
    return x > y ? x : y;
}

static double go_min(double x, double y)
{
    if ((isinf(x) && x < 0) || (isinf(y) && y < 0)) {
        return -INFINITY;
    }
    if (isnan(x) || isnan(y)) {
        return NAN;
    }
    if (x == 0 && x == y) {
        return signbit(x) ? x : y;
    }
    return x < y ? x : y;
}

static double clamp(double x, double lo, double hi) { return go_min(go_max(x, lo), hi); }

/* pick_stance is Go's pickStance. */
static int pick_stance(uint8_t contacts, const double th[2], const double w[2])
{
    switch (contacts & 3u) {
    case 1:
        return 0;
    case 2:
        return 1;
    case 3:
        return th[1] > th[0] ? 1 : 0;
    default:
        return w[1] < w[0] ? 1 : 0;
    }
}

int ctl_law(const struct ctl_gains *g, const struct ctl_reading *r, double tau[2])
{
    double th[2], w[2];
    double e, phi, t_sw, lean, t_st;
    int st, sw;

    if (r->joints == 2) {
        double thT = r->pitch, wT = r->pitch_rate;
        th[0] = r->angle[0] + thT;
        th[1] = r->angle[1] + thT;
        w[0] = r->rate[0] + wT;
        w[1] = r->rate[1] + wT;
        st = pick_stance(r->contacts, th, w);
        sw = 1 - st;
        e = -g->leg_length * w[st] - g->target_speed;
        phi = clamp(g->step_angle + g->step_speed_gain * e, g->step_min, g->step_max);
        t_sw = g->swing_kp * (phi - th[sw]) - g->swing_kd * w[sw];
        lean = clamp(g->lean + g->lean_speed_gain * e, g->lean_min, g->lean_max);
        t_st = g->torso_kp * (thT - lean) + g->torso_kd * wT - t_sw;
        tau[st] = clamp(t_st, -g->torque_limit, g->torque_limit);
        tau[sw] = clamp(t_sw, -g->torque_limit, g->torque_limit);
        return st;
    }
    if (r->joints == 1) {
        th[0] = r->pitch;
        th[1] = r->angle[0] + r->pitch;
        w[0] = r->pitch_rate;
        w[1] = r->rate[0] + r->pitch_rate;
        st = pick_stance(r->contacts, th, w);
        sw = 1 - st;
        e = -g->leg_length * w[st] - g->target_speed;
        phi = clamp(g->step_angle + g->step_speed_gain * e, g->step_min, g->step_max);
        t_sw = g->swing_kp * (phi - th[sw]) - g->swing_kd * w[sw];
        if (sw == 0) {
            t_sw = -t_sw;
        }
        tau[0] = clamp(t_sw, -g->torque_limit, g->torque_limit);
        return st;
    }
    tau[0] = 0;
    tau[1] = 0;
    return 0;
}

static int find_joint(const struct proto_config *rig, const char *name)
{
    int i;
    for (i = 0; i < rig->joints && i < PROTO_MAX_JOINTS; i++) {
        if (strcmp(rig->joint_names[i], name) == 0) {
            return i;
        }
    }
    return -1;
}

const char *ctl_configure(struct ctl_config *cfg, const struct proto_config *rig, int actuators)
{
    double lim = INFINITY;
    int i;

    memset(cfg, 0, sizeof *cfg);
    cfg->gains = ctl_default_gains;
    if (actuators < 1 || actuators > 4) {
        return "firmware drives 1 to 4 joints";
    }
    if (rig->joints != actuators) {
        return "joint count mismatch";
    }
    cfg->hips = (uint8_t)(actuators == 2 || actuators == 4 ? 2 : 1);
    if (actuators > 2) {
        /* A kneed walker: knee_left and knee_right besides the hips. */
        int kl = find_joint(rig, "knee_left");
        int kr = find_joint(rig, "knee_right");
        if (kl < 0 || kr < 0) {
            return "need joints knee_left, knee_right";
        }
        cfg->knee_slot[0] = (uint8_t)kl;
        cfg->knee_slot[1] = (uint8_t)kr;
    }
    if (cfg->hips == 2) {
        int left = find_joint(rig, "hip_left");
        int right = find_joint(rig, "hip_right");
        if (left < 0 || right < 0) {
            return "need joints hip_left, hip_right";
        }
        cfg->slot[0] = (uint8_t)left;
        cfg->slot[1] = (uint8_t)right;
    } else {
        int hip = find_joint(rig, "hip");
        if (hip < 0) {
            return "need joint hip";
        }
        cfg->slot[0] = (uint8_t)hip;
    }
    cfg->joints = (uint8_t)actuators;
    cfg->watchdog_us = rig->watchdog_us;
    cfg->lockstep = rig->lockstep;
    /* The Go reference firmware's rule: the smallest configured limit
     * replaces the law's own when it is positive and lower (a NaN limit
     * compares false and is ignored, as in Go). */
    for (i = 0; i < actuators; i++) {
        lim = go_min(lim, (double)rig->torque_limit[i]);
    }
    if (lim > 0 && lim < cfg->gains.torque_limit) {
        cfg->gains.torque_limit = lim;
    }
    return NULL;
}

void ctl_safe(const struct ctl_config *cfg, struct proto_command *out)
{
    memset(out, 0, sizeof *out);
    out->joints = cfg->joints;
}

void ctl_step(const struct ctl_config *cfg, const struct proto_state *s, struct proto_command *out)
{
    struct ctl_reading r;
    double tau[2] = {0, 0};
    int i;

    ctl_safe(cfg, out);
    memset(&r, 0, sizeof r);
    r.joints = cfg->hips;
    r.pitch = (double)s->imu_pitch;
    r.pitch_rate = (double)s->imu_rate;
    r.contacts = s->contacts;
    for (i = 0; i < cfg->hips; i++) {
        r.angle[i] = (double)s->angle[cfg->slot[i]];
        r.rate[i] = (double)s->rate[cfg->slot[i]];
    }
    if (!isfinite(r.pitch) || !isfinite(r.pitch_rate) || !isfinite(r.angle[0]) ||
        !isfinite(r.angle[1]) || !isfinite(r.rate[0]) || !isfinite(r.rate[1])) {
        out->status = PROTO_STATUS_FAULT | PROTO_STATUS_SAFE_MODE;
        return;
    }
    ctl_law(&cfg->gains, &r, tau);
    /* Knee slots keep the zero ctl_safe wrote: the knees stay passive. */
    for (i = 0; i < cfg->hips; i++) {
        out->torque[cfg->slot[i]] = (float)tau[i];
    }
}

uint32_t ctl_lost_ms(const struct ctl_config *cfg)
{
    /* 64-bit arithmetic: 20 watchdogs of up to 2^32 µs overflow 32 bits. */
    uint64_t ms = ((uint64_t)cfg->watchdog_us * CTL_LOST_WATCHDOGS + 999u) / 1000u;
    if (ms < CTL_LOST_MIN_MS) {
        ms = CTL_LOST_MIN_MS;
    }
    if (ms > 0xFFFFFFFFu) {
        ms = 0xFFFFFFFFu;
    }
    return (uint32_t)ms;
}

enum ctl_link ctl_link_state(const struct ctl_config *cfg, uint32_t silent_ms)
{
    /* Compare in microseconds, so a watchdog below a millisecond counts. */
    if ((uint64_t)silent_ms * 1000u <= cfg->watchdog_us) {
        return CTL_LINK_OK;
    }
    if (silent_ms < ctl_lost_ms(cfg)) {
        return CTL_LINK_QUIET;
    }
    return CTL_LINK_LOST;
}
