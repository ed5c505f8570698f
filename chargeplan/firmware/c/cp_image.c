/* chargeplan reference implementation: the image reader (byte by byte, little-endian). */
#include "cp_program.h"

#include <string.h>

uint32_t cpr_crc32(const uint8_t *data, size_t size)
{
    uint32_t crc = 0xFFFFFFFFu;
    size_t i;
    int bit;
    for (i = 0; i < size; ++i) {
        crc ^= data[i];
        for (bit = 0; bit < 8; ++bit) {
            crc = (crc & 1u) ? (crc >> 1) ^ 0xEDB88320u : crc >> 1;
        }
    }
    return crc ^ 0xFFFFFFFFu;
}

typedef struct {
    const uint8_t *data;
    size_t offset;
    size_t end;
    int short_read;
} cpr_reader_t;

static uint32_t take(cpr_reader_t *r, unsigned bytes)
{
    uint32_t value = 0;
    unsigned i;
    if (r->offset + bytes > r->end) {
        r->short_read = 1;
        return 0;
    }
    for (i = 0; i < bytes; ++i) {
        value |= (uint32_t)r->data[r->offset + i] << (8u * i);
    }
    r->offset += bytes;
    return value;
}

static uint8_t u8(cpr_reader_t *r) { return (uint8_t)take(r, 1); }
static uint16_t u16(cpr_reader_t *r) { return (uint16_t)take(r, 2); }
static uint32_t u32(cpr_reader_t *r) { return take(r, 4); }

static int16_t s16(cpr_reader_t *r)
{
    uint32_t v = take(r, 2);
    return (int16_t)(v >= 0x8000u ? (int32_t)v - 0x10000 : (int32_t)v);
}

static int32_t s32(cpr_reader_t *r)
{
    uint32_t v = take(r, 4);
    return v >= 0x80000000u ? (int32_t)(v - 0x80000000u) - (int32_t)0x7FFFFFFF - 1
                            : (int32_t)v;
}

static uint32_t head_u32(const uint8_t *p)
{
    return (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 | (uint32_t)p[3] << 24;
}

static cpr_status_t read_frame(const uint8_t *data, size_t size, size_t *end)
{
    uint32_t length;
    if (size < 16u) {
        return CPR_ERR_SHORT;
    }
    if (memcmp(data, "CPSI", 4) != 0) {
        return CPR_ERR_MAGIC;
    }
    if ((data[4] | data[5] << 8) != CPR_IMAGE_VERSION
        || (data[6] | data[7] << 8) != CPR_DOCUMENT_VERSION) {
        return CPR_ERR_VERSION;
    }
    length = head_u32(data + 8);
    if (length > size || (size_t)length + 16u != size) {
        return CPR_ERR_LENGTH;
    }
    *end = 12u + (size_t)length;
    if (cpr_crc32(data, *end) != head_u32(data + *end)) {
        return CPR_ERR_CRC;
    }
    return CPR_OK;
}

static void read_limits(cpr_reader_t *r, cpr_program_t *p)
{
    p->cells_in_series = u16(r);
    p->capacity_mAh = u32(r);
    p->planned_temperature_dC = s16(r);
    p->stage_count = u8(r);
    p->finish_hold = u8(r);
    p->chemistry = u8(r);
    p->charge_temperature_min_dC = s16(r);
    p->charge_temperature_max_dC = s16(r);
    p->cell_voltage_max_mV = u16(r);
    p->battery_voltage_max_mV = u32(r);
    p->current_max_mA = u32(r);
    p->cool_below_dC = s16(r);
    p->cool_current_max_mA = u32(r);
    p->warm_above_dC = s16(r);
    p->warm_cell_voltage_max_mV = u16(r);
    p->compensation_present = u8(r);
    p->coefficient_uV_per_K_per_cell = s32(r);
    (void)s32(r); /* reserved */
    p->compensation_reference_dC = s16(r);
    p->compensation_min_dC = s16(r);
    p->compensation_max_dC = s16(r);
}

static cpr_status_t read_program(cpr_reader_t *r, cpr_program_t *p)
{
    unsigned i;
    for (i = 0; i < 32u; ++i) {
        p->digest[i] = u8(r);
    }
    p->precharge_below_mV = u32(r);
    p->precharge_current_mA = u32(r);
    p->precharge_timer_s = u32(r);
    p->restart_voltage_mV = u32(r);
    p->restart_condition = u8(r);
    p->restart_filter_s = u32(r);
    p->temperature_margin_dK = u16(r);
    p->voltage_filter_s = u16(r);
    p->no_battery_below_mV = u32(r);
    p->cells_above_mV = u32(r);
    p->nominal_voltage_mV = u32(r);
    p->fault_count = u8(r);
    if (p->fault_count > CPR_MAX_FAULTS || p->restart_condition > CPR_RESTART_FLOAT_BELOW) {
        return CPR_ERR_RANGE;
    }
    for (i = 0; i < p->fault_count; ++i) {
        p->fault_code[i] = u8(r);
        p->fault_action[i] = u8(r);
        if (p->fault_action[i] > CPR_ACTION_PAUSE) {
            return CPR_ERR_RANGE;
        }
    }
    return CPR_OK;
}

static cpr_status_t read_stages(cpr_reader_t *r, cpr_program_t *p)
{
    unsigned i;
    if (p->stage_count == 0u || p->stage_count > CPR_MAX_STAGES || p->cells_in_series == 0u) {
        return CPR_ERR_RANGE;
    }
    for (i = 0; i < p->stage_count; ++i) {
        cpr_stage_t *s = &p->stages[i];
        s->kind = u8(r);
        s->compensated = u8(r);
        s->voltage_mV = u32(r);
        s->current_mA = u32(r);
        s->timer_s = u32(r);
        s->exit_voltage_mV = u32(r);
        s->exit_voltage_then = u8(r);
        s->exit_current_mA = u32(r);
        s->exit_current_then = u8(r);
        s->exit_duration_s = u32(r);
        s->exit_duration_then = u8(r);
        s->guard_charge_mAh = u32(r);
        s->guard_current_rising_mA = u32(r);
        s->guard_temperature_rise_dK = u32(r);
        if (s->kind < 1u || s->kind > 7u) {
            return CPR_ERR_RANGE;
        }
    }
    return CPR_OK;
}

static void read_table(cpr_reader_t *r, cpr_program_t *p)
{
    unsigned i;
    p->row_count = u8(r);
    p->table_step_dC = s16(r);
    for (i = 0; i < p->row_count; ++i) {
        p->rows[i].temperature_dC = s16(r);
        p->rows[i].charge_voltage_mV = u32(r);
        p->rows[i].hold_voltage_mV = u32(r);
        p->rows[i].current_max_mA = u32(r);
    }
}

cpr_status_t cpr_read_image(const uint8_t *data, size_t size, cpr_program_t *out)
{
    cpr_reader_t r;
    size_t end = 0;
    cpr_status_t status = read_frame(data, size, &end);
    if (status != CPR_OK) {
        return status;
    }
    memset(out, 0, sizeof *out); /* on an error, out holds no usable program */
    r.data = data;
    r.offset = 12u;
    r.end = end;
    r.short_read = 0;
    read_limits(&r, out);
    status = read_program(&r, out);
    if (status == CPR_OK) {
        status = read_stages(&r, out);
    }
    if (status == CPR_OK) {
        read_table(&r, out);
        if (r.short_read || r.offset != end) {
            status = CPR_ERR_LAYOUT;
        }
    }
    if (status != CPR_OK) {
        out->stage_count = 0; /* never a runnable program */
    }
    return status;
}

size_t cpr_program_size(void) { return sizeof(cpr_program_t); }
size_t cpr_state_size(void) { return sizeof(cpr_state_t); }
