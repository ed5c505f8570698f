/* chargeplan reference implementation: host test on an image written by chargeplan.
 *
 * make test IMAGE=setpoints.bin: reads the image (and refuses a copy with one bit
 * flipped), then drives the state machine through a charge with a crude battery (the
 * voltage rises with the charge put in) and through the faults: over-temperature pauses
 * and resumes after the hysteresis, over-voltage latches, an open probe latches, a stage
 * that never ends runs into its timer. Exit status 0 when every check holds. */
#include <stdio.h>
#include <string.h>

#include "cp_program.h"

#define IMAGE_MAX 16384

static unsigned failures = 0;

static void expect(int ok, const char *what)
{
    printf("%s  %s\n", ok ? "ok  " : "FAIL", what);
    if (!ok) {
        ++failures;
    }
}

static cpr_program_t program;
static uint8_t image[IMAGE_MAX];

/* connect at the first stage's voltage less 5 % (at most a rested battery's), at the
 * planned temperature */
static int32_t start_voltage(void)
{
    uint32_t v = program.stages[0].voltage_mV;
    uint32_t low = program.precharge_below_mV + 1u;
    uint32_t mid = v - v / 20u;
    if (mid >= program.cells_above_mV) {
        mid = program.cells_above_mV - 1u; /* a rested battery of this kind */
    }
    return (int32_t)(mid > low ? mid : low);
}

static void charge_reaches_its_stages(void)
{
    cpr_state_t s;
    cpr_output_t out;
    int32_t t = program.planned_temperature_dC;
    int32_t v = start_voltage();
    uint32_t now;
    uint8_t seen_second = 0;
    cpr_init(&s, &program);
    out = cpr_step(&s, 0, v, 0, t, CPR_PROBE_OK);
    expect(out.stage == program.stages[0].kind && out.fault == 0, "connection starts stage 1");
    for (now = 1; now < 200000u && out.stage != 0; ++now) {
        int32_t i = out.current_limit_mA;
        if (v < out.target_voltage_mV) {
            v += 1 + (out.target_voltage_mV - v) / 500; /* rises toward the target */
        } else {
            v = out.target_voltage_mV;
            i = out.current_limit_mA / (int32_t)(1u + now / 60u); /* tapers at constant V */
        }
        out = cpr_step(&s, now, v, i, t, CPR_PROBE_OK);
        if (program.stage_count > 1u && out.stage == program.stages[1].kind) {
            seen_second = 1;
        }
        if (program.finish_hold && out.stage == program.stages[program.stage_count - 1u].kind
            && program.stage_count > 2u) {
            break; /* holding on float */
        }
    }
    expect(out.fault == 0, "no fault during a normal charge");
    expect(program.stage_count < 2u || seen_second, "the charge moved on to stage 2");
}

static void over_temperature_pauses_and_resumes(void)
{
    cpr_state_t s;
    cpr_output_t out;
    int32_t hot = program.charge_temperature_max_dC + 10;
    int32_t back = program.charge_temperature_max_dC - (int32_t)program.temperature_margin_dK;
    int32_t v = start_voltage();
    int32_t start = program.planned_temperature_dC;
    uint32_t rise = program.stages[0].guard_temperature_rise_dK;
    if (rise != CPR_NONE_U32 && hot - (int32_t)rise > start) {
        start = hot - (int32_t)rise; /* a warm room: a larger rise latches its guard first */
    }
    cpr_init(&s, &program);
    (void)cpr_step(&s, 0, v, 0, start, CPR_PROBE_OK);
    out = cpr_step(&s, 1, v, 0, hot, CPR_PROBE_OK);
    expect(out.fault == CPR_FAULT_TEMPERATURE_HIGH && out.current_limit_mA == 0,
           "over-temperature pauses");
    out = cpr_step(&s, 2, v, 0, back + 1, CPR_PROBE_OK);
    expect(out.fault == CPR_FAULT_TEMPERATURE_HIGH, "still paused inside the hysteresis");
    out = cpr_step(&s, 3, v, 0, back, CPR_PROBE_OK);
    expect(out.fault == 0 && out.stage == program.stages[0].kind, "resumes after it");
}

static void over_voltage_latches(void)
{
    cpr_state_t s;
    cpr_output_t out;
    uint32_t now;
    int32_t high = (int32_t)program.battery_voltage_max_mV + 50;
    cpr_init(&s, &program);
    (void)cpr_step(&s, 0, start_voltage(), 0, program.planned_temperature_dC, CPR_PROBE_OK);
    for (now = 1; now <= 1u + program.voltage_filter_s; ++now) {
        out = cpr_step(&s, now, high, 0, program.planned_temperature_dC, CPR_PROBE_OK);
    }
    expect(out.fault == CPR_FAULT_OVER_VOLTAGE, "over-voltage latches after its filter");
    out = cpr_step(&s, now + 1u, start_voltage(), 0, program.planned_temperature_dC,
                   CPR_PROBE_OK);
    expect(out.fault == CPR_FAULT_OVER_VOLTAGE && out.current_limit_mA == 0, "and stays");
}

static void open_probe_latches(void)
{
    cpr_state_t s;
    cpr_output_t out;
    cpr_init(&s, &program);
    out = cpr_step(&s, 0, start_voltage(), 0, program.planned_temperature_dC, CPR_PROBE_OPEN);
    expect(out.fault == CPR_FAULT_PROBE_OPEN, "an open probe latches");
}

static void timer_expiry_latches(void)
{
    cpr_state_t s;
    cpr_output_t out;
    int32_t v = start_voltage(); /* held below the first stage's exit: it never ends */
    cpr_init(&s, &program);
    (void)cpr_step(&s, 0, v, 0, program.planned_temperature_dC, CPR_PROBE_OK);
    out = cpr_step(&s, program.stages[0].timer_s, v, 0, program.planned_temperature_dC,
                   CPR_PROBE_OK);
    expect(program.stages[0].timer_s == CPR_NONE_U32 || out.fault == CPR_FAULT_STAGE_TIMER,
           "a stage that does not end runs into its timer");
}

int main(int argc, char **argv)
{
    const char *path = argc > 1 ? argv[1] : "setpoints.bin";
    FILE *f = fopen(path, "rb");
    size_t size;
    cpr_status_t status;
    if (f == NULL) {
        fprintf(stderr, "cannot open %s (write it with chargeplan firmware -o DIR --battery "
                        "FILE)\n", path);
        return 2;
    }
    size = fread(image, 1, sizeof image, f);
    fclose(f);
    status = cpr_read_image(image, size, &program);
    expect(status == CPR_OK, "the image reads (magic, versions, length, CRC-32, layout)");
    if (status != CPR_OK) {
        return 1;
    }
    printf("      %u cells, %u stages, digest %02x%02x...\n", (unsigned)program.cells_in_series,
           (unsigned)program.stage_count, program.digest[0], program.digest[1]);
    expect(cpr_crc32((const uint8_t *)"123456789", 9) == 0xCBF43926u,
           "CRC-32/ISO-HDLC check value 0xCBF43926");
    image[size / 2] ^= 0x04u;
    expect(cpr_read_image(image, size, &program) == CPR_ERR_CRC, "a flipped bit is refused");
    image[size / 2] ^= 0x04u;
    (void)cpr_read_image(image, size, &program);
    charge_reaches_its_stages();
    over_temperature_pauses_and_resumes();
    over_voltage_latches();
    open_probe_latches();
    timer_expiry_latches();
    printf("%s\n", failures ? "FAILED" : "all host checks passed");
    return failures ? 1 : 0;
}
