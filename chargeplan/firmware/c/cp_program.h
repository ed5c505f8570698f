/*
 * chargeplan reference implementation: a charge program (setpoint document version 4,
 * image format 2) read from its image and run as a state machine.
 *
 * Portable C99: fixed-width integers in the document's units (mV, mA, s, 0.1 degC),
 * no dynamic memory, no floating point. The image is read byte by byte, little-endian,
 * so it works on any compiler and byte order (packed structs are not C99).
 *
 * A reference, not a certified charger: the battery maker's datasheet, local codes and
 * licensed practice come first.
 */
#ifndef CP_PROGRAM_H
#define CP_PROGRAM_H

#include <stddef.h>
#include <stdint.h>

#include "cp_faults.h"

#ifdef __cplusplus
extern "C" {
#endif

#ifndef CPR_MAX_STAGES
#define CPR_MAX_STAGES 8
#endif
#ifndef CPR_MAX_FAULTS
#define CPR_MAX_FAULTS 32
#endif
#ifndef CPR_MAX_ROWS
#define CPR_MAX_ROWS 255
#endif

#define CPR_IMAGE_VERSION 2u
#define CPR_DOCUMENT_VERSION 4u
#define CPR_NONE_U32 0xFFFFFFFFu
#define CPR_THEN_NEXT 0u
#define CPR_THEN_STOP 1u
#define CPR_RESTART_REST_BELOW 0u
#define CPR_RESTART_FLOAT_BELOW 1u
#define CPR_ACTION_LATCH 0u
#define CPR_ACTION_PAUSE 1u
#define CPR_PROBE_OK 0u
#define CPR_PROBE_OPEN 1u
#define CPR_PROBE_SHORT 2u
#define CPR_KIND_PRECHARGE 1u
/* "at constant voltage": within this of the target, per cell (tail and rising current) */
#define CPR_CV_BAND_MV_PER_CELL 10

/* reading the image */
typedef enum {
    CPR_OK = 0,
    CPR_ERR_SHORT = 1,    /* shorter than its header and CRC */
    CPR_ERR_MAGIC = 2,    /* not "CPSI" */
    CPR_ERR_VERSION = 3,  /* an image or document version this reader does not know */
    CPR_ERR_LENGTH = 4,   /* the length field does not match the bytes */
    CPR_ERR_CRC = 5,      /* CRC-32 mismatch: changed or damaged */
    CPR_ERR_LAYOUT = 6,   /* the payload's blocks do not fill it exactly */
    CPR_ERR_RANGE = 7     /* a count or code this reader cannot hold or does not know */
} cpr_status_t;

typedef struct {
    uint8_t kind;
    uint8_t compensated;
    uint32_t voltage_mV;
    uint32_t current_mA;
    uint32_t timer_s;                 /* CPR_NONE_U32: none */
    uint32_t exit_voltage_mV;         /* CPR_NONE_U32: no such exit */
    uint8_t exit_voltage_then;
    uint32_t exit_current_mA;
    uint8_t exit_current_then;
    uint32_t exit_duration_s;
    uint8_t exit_duration_then;
    uint32_t guard_charge_mAh;        /* fault guards; CPR_NONE_U32: none */
    uint32_t guard_current_rising_mA;
    uint32_t guard_temperature_rise_dK;
} cpr_stage_t;

typedef struct {
    int16_t temperature_dC;
    uint32_t charge_voltage_mV;
    uint32_t hold_voltage_mV;
    uint32_t current_max_mA;
} cpr_row_t;

typedef struct {
    uint16_t cells_in_series;
    uint32_t capacity_mAh;
    int16_t planned_temperature_dC;
    uint8_t stage_count;
    uint8_t finish_hold;
    uint8_t chemistry;
    int16_t charge_temperature_min_dC;
    int16_t charge_temperature_max_dC;
    uint16_t cell_voltage_max_mV;
    uint32_t battery_voltage_max_mV;
    uint32_t current_max_mA;
    int16_t cool_below_dC;            /* -32768: no cool zone */
    uint32_t cool_current_max_mA;
    int16_t warm_above_dC;            /* 32767: no warm zone */
    uint16_t warm_cell_voltage_max_mV;
    uint8_t compensation_present;
    int32_t coefficient_uV_per_K_per_cell;
    int16_t compensation_reference_dC;
    int16_t compensation_min_dC;
    int16_t compensation_max_dC;
    uint8_t digest[32];
    uint32_t precharge_below_mV;
    uint32_t precharge_current_mA;
    uint32_t precharge_timer_s;
    uint32_t restart_voltage_mV;
    uint8_t restart_condition;
    uint32_t restart_filter_s;
    uint16_t temperature_margin_dK;
    uint16_t voltage_filter_s;
    uint32_t no_battery_below_mV;
    uint32_t cells_above_mV;
    uint32_t nominal_voltage_mV;
    uint8_t fault_count;
    uint8_t fault_code[CPR_MAX_FAULTS];
    uint8_t fault_action[CPR_MAX_FAULTS];
    cpr_stage_t stages[CPR_MAX_STAGES];
    uint8_t row_count;
    int16_t table_step_dC;
    cpr_row_t rows[CPR_MAX_ROWS];
} cpr_program_t;

/* CRC-32/ISO-HDLC (reflected 0x04C11DB7, init and xorout 0xFFFFFFFF), bit by bit */
uint32_t cpr_crc32(const uint8_t *data, size_t size);

/* Read and check an image into out; on any other status than CPR_OK, out is unusable. */
cpr_status_t cpr_read_image(const uint8_t *data, size_t size, cpr_program_t *out);

/* the running state of one charger channel */
typedef struct {
    const cpr_program_t *program;
    uint8_t mode;
    uint8_t index;
    uint8_t pause;           /* the pausing fault's code, 0: running */
    uint8_t latched;         /* the latched fault's code, 0: none */
    uint8_t started;
    uint8_t min_current_set;
    int64_t stage_start_s;
    int64_t paused_at_s;
    int64_t charge_mAs;
    int64_t last_s;
    int64_t min_current_mA;
    int32_t stage_temperature_dC;
    int64_t ov_since_s;      /* -1: not tripped */
    int64_t oc_since_s;
    int64_t restart_since_s;
} cpr_state_t;

typedef struct {
    int32_t target_voltage_mV;
    int32_t current_limit_mA;
    uint8_t stage;           /* the running stage's kind code; 0: off */
    uint8_t fault;           /* the latched or pausing fault's code; 0: none */
} cpr_output_t;

void cpr_init(cpr_state_t *state, const cpr_program_t *program);

/* One step, called at least once a second with the channel's measurements. */
cpr_output_t cpr_step(cpr_state_t *state, uint32_t now_s, int32_t voltage_mV,
                      int32_t current_mA, int32_t temperature_dC, uint8_t probe_state);

/* the same step through plain arguments and an out-pointer (for foreign-function calls) */
void cpr_step_out(cpr_state_t *state, uint32_t now_s, int32_t voltage_mV, int32_t current_mA,
                  int32_t temperature_dC, uint8_t probe_state, cpr_output_t *out);

size_t cpr_program_size(void);
size_t cpr_state_size(void);

#ifdef __cplusplus
}
#endif

#endif /* CP_PROGRAM_H */
