/* chargeplan reference implementation: the charge program's state machine.
 *
 * The same semantics as chargeplan.firmware.program.ProgramRunner (the project's tests
 * feed both one trace of inputs and compare every output). One step, in order: a latched
 * fault holds everything off; the probe; over-voltage and over-current after their filter;
 * after a stop, the restart rule; outside the charge window a pause (the stage clock
 * stands still); at connection the battery checks and the pre-charge; in a stage the fault
 * guards, then the exits, then the safety timer; under float the restart rule. */
#include "cp_program.h"

enum { MODE_START = 0, MODE_PRECHARGE, MODE_STAGE, MODE_DONE, MODE_LATCHED };

static cpr_output_t off(uint8_t fault)
{
    cpr_output_t out;
    out.target_voltage_mV = 0;
    out.current_limit_mA = 0;
    out.stage = 0;
    out.fault = fault;
    return out;
}

static cpr_output_t latch(cpr_state_t *s, uint8_t code)
{
    s->mode = MODE_LATCHED;
    s->latched = code;
    return off(code);
}

static int64_t floor_div(int64_t a, int64_t b)
{
    int64_t q = a / b;
    return (a % b != 0 && ((a < 0) != (b < 0))) ? q - 1 : q;
}

static int32_t clamp32(int32_t v, int32_t lo, int32_t hi)
{
    return v < lo ? lo : (v > hi ? hi : v);
}

static int64_t min64(int64_t a, int64_t b) { return a < b ? a : b; }

static uint8_t action_of(const cpr_program_t *p, uint8_t code)
{
    unsigned i;
    for (i = 0; i < p->fault_count; ++i) {
        if (p->fault_code[i] == code) {
            return p->fault_action[i];
        }
    }
    return CPR_ACTION_LATCH; /* a fault the image does not list latches */
}

static int64_t adjust_mV(const cpr_program_t *p, int32_t t_dC)
{
    int32_t delta;
    if (!p->compensation_present) {
        return 0;
    }
    delta = clamp32(t_dC, p->compensation_min_dC, p->compensation_max_dC)
            - clamp32(p->planned_temperature_dC, p->compensation_min_dC, p->compensation_max_dC);
    return floor_div((int64_t)p->coefficient_uV_per_K_per_cell * p->cells_in_series * delta,
                     10000);
}

static int64_t ceiling_mV(const cpr_program_t *p, int32_t t_dC)
{
    int64_t ceiling = p->battery_voltage_max_mV;
    if (p->warm_above_dC != 32767 && t_dC > p->warm_above_dC) {
        ceiling = min64(ceiling, (int64_t)p->warm_cell_voltage_max_mV * p->cells_in_series);
    }
    return ceiling;
}

static int32_t limit_mA(const cpr_program_t *p, uint32_t current_mA, int32_t t_dC)
{
    int64_t limit = min64(current_mA, p->current_max_mA);
    if (p->cool_below_dC != -32768 && t_dC < p->cool_below_dC) {
        limit = min64(limit, p->cool_current_max_mA);
    }
    return (int32_t)limit;
}

static int32_t target_mV(const cpr_program_t *p, const cpr_stage_t *st, int32_t t_dC)
{
    int64_t adjust = st->compensated ? adjust_mV(p, t_dC) : 0;
    int64_t target = min64((int64_t)st->voltage_mV + adjust, ceiling_mV(p, t_dC));
    return (int32_t)(target < 0 ? 0 : target);
}

static void enter(cpr_state_t *s, uint8_t mode, uint8_t index, int64_t now, int32_t t_dC)
{
    s->mode = mode;
    s->index = index;
    s->stage_start_s = now;
    s->stage_temperature_dC = t_dC;
    s->min_current_set = 0;
}

static void begin_charge(cpr_state_t *s, int64_t now, int32_t t_dC)
{
    s->charge_mAs = 0;
    s->restart_since_s = -1;
    enter(s, MODE_STAGE, 0, now, t_dC);
}

static cpr_output_t outputs(const cpr_state_t *s, int32_t t_dC)
{
    const cpr_program_t *p = s->program;
    const cpr_stage_t *st = &p->stages[s->index];
    cpr_output_t out;
    out.target_voltage_mV = target_mV(p, st, t_dC);
    out.current_limit_mA = limit_mA(p, st->current_mA, t_dC);
    out.stage = st->kind;
    out.fault = 0;
    return out;
}

/* a trip that has lasted the filter time */
static int filtered(int64_t *since, int tripped, int64_t now, int64_t filter_s)
{
    if (!tripped) {
        *since = -1;
        return 0;
    }
    if (*since < 0) {
        *since = now;
    }
    return now - *since >= filter_s;
}

static int holds(const cpr_stage_t *st)
{
    return st->exit_voltage_mV == CPR_NONE_U32 && st->exit_current_mA == CPR_NONE_U32
           && st->exit_duration_s == CPR_NONE_U32;
}

void cpr_init(cpr_state_t *s, const cpr_program_t *program)
{
    s->program = program;
    s->mode = MODE_START;
    s->index = 0;
    s->pause = 0;
    s->latched = 0;
    s->started = 0;
    s->min_current_set = 0;
    s->stage_start_s = 0;
    s->paused_at_s = 0;
    s->charge_mAs = 0;
    s->last_s = 0;
    s->min_current_mA = 0;
    s->stage_temperature_dC = 0;
    s->ov_since_s = -1;
    s->oc_since_s = -1;
    s->restart_since_s = -1;
}

/* 1 when a pause holds the charge (out set), 0 to go on */
static int temperature_pause(cpr_state_t *s, int64_t now, int32_t t_dC, cpr_output_t *out)
{
    const cpr_program_t *p = s->program;
    int32_t margin = p->temperature_margin_dK;
    uint8_t code;
    if ((s->pause == CPR_FAULT_TEMPERATURE_LOW && t_dC < p->charge_temperature_min_dC + margin)
        || (s->pause == CPR_FAULT_TEMPERATURE_HIGH
            && t_dC > p->charge_temperature_max_dC - margin)) {
        *out = off(s->pause);
        return 1;
    }
    if (s->pause) {
        s->stage_start_s += now - s->paused_at_s; /* the stage clock stood still */
        s->pause = 0;
    }
    if (t_dC >= p->charge_temperature_min_dC && t_dC <= p->charge_temperature_max_dC) {
        return 0;
    }
    code = t_dC < p->charge_temperature_min_dC ? CPR_FAULT_TEMPERATURE_LOW
                                                : CPR_FAULT_TEMPERATURE_HIGH;
    if (action_of(p, code) == CPR_ACTION_LATCH) {
        *out = latch(s, code);
        return 1;
    }
    s->pause = code;
    s->paused_at_s = now;
    *out = off(code);
    return 1;
}

/* 1 when the connection checks hold the charge (out set), 0 once it has begun */
static int connect(cpr_state_t *s, int64_t now, int32_t v_mV, int32_t t_dC, cpr_output_t *out)
{
    const cpr_program_t *p = s->program;
    if ((int64_t)v_mV < (int64_t)p->no_battery_below_mV) {
        *out = action_of(p, CPR_FAULT_NO_BATTERY) == CPR_ACTION_LATCH
                   ? latch(s, CPR_FAULT_NO_BATTERY) : off(CPR_FAULT_NO_BATTERY);
        return 1;
    }
    if ((int64_t)v_mV > (int64_t)p->cells_above_mV) {
        *out = latch(s, CPR_FAULT_WRONG_CELL_COUNT);
        return 1;
    }
    s->charge_mAs = 0;
    if ((int64_t)v_mV < (int64_t)p->precharge_below_mV) {
        enter(s, MODE_PRECHARGE, 0, now, t_dC);
    } else {
        begin_charge(s, now, t_dC);
    }
    return 0;
}

static cpr_output_t precharge(cpr_state_t *s, int64_t now, int32_t v_mV, int32_t t_dC)
{
    const cpr_program_t *p = s->program;
    cpr_output_t out;
    if ((int64_t)v_mV >= (int64_t)p->precharge_below_mV) {
        enter(s, MODE_STAGE, 0, now, t_dC);
        return outputs(s, t_dC);
    }
    if (now - s->stage_start_s >= (int64_t)p->precharge_timer_s) {
        return latch(s, CPR_FAULT_STAGE_TIMER);
    }
    out.target_voltage_mV = (int32_t)p->precharge_below_mV;
    out.current_limit_mA = limit_mA(p, p->precharge_current_mA, t_dC);
    out.stage = CPR_KIND_PRECHARGE;
    out.fault = 0;
    return out;
}

/* the fault guard that trips, or 0 */
static uint8_t guards(cpr_state_t *s, const cpr_stage_t *st, int at_cv, int32_t i_mA,
                      int32_t t_dC)
{
    if (st->guard_charge_mAh != CPR_NONE_U32
        && s->charge_mAs > (int64_t)st->guard_charge_mAh * 3600) {
        return CPR_FAULT_CHARGE_ABOVE;
    }
    if (at_cv) {
        if (st->guard_current_rising_mA != CPR_NONE_U32 && s->min_current_set
            && (int64_t)i_mA > s->min_current_mA + (int64_t)st->guard_current_rising_mA) {
            return CPR_FAULT_CURRENT_RISING;
        }
        if (!s->min_current_set || i_mA < s->min_current_mA) {
            s->min_current_mA = i_mA;
            s->min_current_set = 1;
        }
    }
    if (st->guard_temperature_rise_dK != CPR_NONE_U32
        && (int64_t)t_dC - s->stage_temperature_dC > (int64_t)st->guard_temperature_rise_dK) {
        return CPR_FAULT_TEMPERATURE_RISE;
    }
    return 0;
}

/* -1: no exit met; else the then of the first exit met */
static int ended(const cpr_stage_t *st, int at_cv, int64_t elapsed, int32_t v_mV, int32_t i_mA,
                 int64_t adjust, int32_t target)
{
    if (st->exit_voltage_mV != CPR_NONE_U32
        && (int64_t)v_mV >= min64((int64_t)st->exit_voltage_mV + adjust, target)) {
        return st->exit_voltage_then;
    }
    if (st->exit_current_mA != CPR_NONE_U32 && at_cv
        && (int64_t)i_mA < (int64_t)st->exit_current_mA) {
        return st->exit_current_then;
    }
    if (st->exit_duration_s != CPR_NONE_U32 && elapsed >= (int64_t)st->exit_duration_s) {
        return st->exit_duration_then;
    }
    return -1;
}

static int restart_due(cpr_state_t *s, int below, int64_t now)
{
    if (!below) {
        s->restart_since_s = -1;
        return 0;
    }
    if (s->restart_since_s < 0) {
        s->restart_since_s = now;
    }
    return now - s->restart_since_s >= (int64_t)s->program->restart_filter_s;
}

static cpr_output_t stage(cpr_state_t *s, int64_t now, int32_t v_mV, int32_t i_mA, int32_t t_dC)
{
    const cpr_program_t *p = s->program;
    const cpr_stage_t *st = &p->stages[s->index];
    int32_t target = target_mV(p, st, t_dC);
    int64_t adjust = st->compensated ? adjust_mV(p, t_dC) : 0;
    int at_cv = (int64_t)v_mV >= (int64_t)target - (int64_t)CPR_CV_BAND_MV_PER_CELL
                                                       * p->cells_in_series;
    uint8_t guard = guards(s, st, at_cv, i_mA, t_dC);
    int64_t elapsed = now - s->stage_start_s;
    int then;
    if (guard) {
        return latch(s, guard);
    }
    then = ended(st, at_cv, elapsed, v_mV, i_mA, adjust, target);
    if (then == (int)CPR_THEN_STOP
        || (then == (int)CPR_THEN_NEXT && s->index + 1u >= p->stage_count)) {
        s->mode = MODE_DONE;
        s->restart_since_s = -1;
        return off(0);
    }
    if (then == (int)CPR_THEN_NEXT) {
        enter(s, MODE_STAGE, (uint8_t)(s->index + 1u), now, t_dC);
        return outputs(s, t_dC);
    }
    if (st->timer_s != CPR_NONE_U32 && elapsed >= (int64_t)st->timer_s) {
        return latch(s, CPR_FAULT_STAGE_TIMER);
    }
    if (holds(st) && p->restart_condition == CPR_RESTART_FLOAT_BELOW
        && restart_due(s, (int64_t)v_mV < (int64_t)p->restart_voltage_mV, now)) {
        begin_charge(s, now, t_dC);
    }
    return outputs(s, t_dC);
}

/* 1 when still off after a stop (out set), 0 once the restart rule has begun a charge */
static int done(cpr_state_t *s, int64_t now, int32_t v_mV, int32_t t_dC, cpr_output_t *out)
{
    const cpr_program_t *p = s->program;
    if ((int64_t)v_mV < (int64_t)p->no_battery_below_mV) {
        s->mode = MODE_START; /* taken off: the next battery is a new connection */
        *out = off(CPR_FAULT_NO_BATTERY);
        return 1;
    }
    if (p->restart_condition == CPR_RESTART_REST_BELOW
        && restart_due(s, (int64_t)v_mV < (int64_t)p->restart_voltage_mV, now)) {
        begin_charge(s, now, t_dC);
        return 0;
    }
    *out = off(0);
    return 1;
}

cpr_output_t cpr_step(cpr_state_t *s, uint32_t now_s, int32_t voltage_mV, int32_t current_mA,
                      int32_t temperature_dC, uint8_t probe_state)
{
    const cpr_program_t *p = s->program;
    int64_t now = (int64_t)now_s;
    int64_t dt;
    cpr_output_t out;
    if (p == 0 || p->stage_count == 0u) {
        return off(0); /* no program read: never charge */
    }
    if (s->mode == MODE_LATCHED) {
        return off(s->latched);
    }
    dt = s->started ? now - s->last_s : 0;
    if (dt < 0) {
        dt = 0;
    }
    s->started = 1;
    s->last_s = now;
    if ((s->mode == MODE_PRECHARGE || s->mode == MODE_STAGE) && !s->pause && current_mA > 0) {
        s->charge_mAs += (int64_t)current_mA * dt;
    }
    if (probe_state == CPR_PROBE_OPEN) {
        return latch(s, CPR_FAULT_PROBE_OPEN);
    }
    if (probe_state == CPR_PROBE_SHORT) {
        return latch(s, CPR_FAULT_PROBE_SHORT);
    }
    if (filtered(&s->ov_since_s, (int64_t)voltage_mV > (int64_t)p->battery_voltage_max_mV, now,
                 p->voltage_filter_s)) {
        return latch(s, CPR_FAULT_OVER_VOLTAGE);
    }
    if (filtered(&s->oc_since_s, (int64_t)current_mA > (int64_t)p->current_max_mA, now,
                 p->voltage_filter_s)) {
        return latch(s, CPR_FAULT_OVER_CURRENT);
    }
    if (s->mode == MODE_DONE && done(s, now, voltage_mV, temperature_dC, &out)) {
        return out;
    }
    if (temperature_pause(s, now, temperature_dC, &out)) {
        return out;
    }
    if (s->mode == MODE_START && connect(s, now, voltage_mV, temperature_dC, &out)) {
        return out;
    }
    if (s->mode == MODE_PRECHARGE) {
        return precharge(s, now, voltage_mV, temperature_dC);
    }
    return stage(s, now, voltage_mV, current_mA, temperature_dC);
}

void cpr_step_out(cpr_state_t *s, uint32_t now_s, int32_t voltage_mV, int32_t current_mA,
                  int32_t temperature_dC, uint8_t probe_state, cpr_output_t *out)
{
    *out = cpr_step(s, now_s, voltage_mV, current_mA, temperature_dC, probe_state);
}
