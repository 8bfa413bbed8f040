/*
 * Firmware-style use of a coefc header: per-channel state, a block callback as
 * an audio or sensor DMA interrupt would call it, and a self test that runs the
 * header's golden vectors through this very build.
 */
#include <stdio.h>
#include <string.h>

#include "probe_front_end.h"

/* The kernel's names for this target (chosen by the build). */
#if defined(FILTER_KERNEL_mcu16)
#define K(name) coefc_mcu16_##name
typedef coefc_mcu16_state_t state_word_t;
typedef coefc_mcu16_data_t sample_t;
#elif defined(FILTER_KERNEL_mcu32)
#define K(name) coefc_mcu32_##name
typedef coefc_mcu32_state_t state_word_t;
typedef coefc_mcu32_data_t sample_t;
#elif defined(FILTER_KERNEL_dsp24)
#define K(name) coefc_dsp24_##name
typedef coefc_dsp24_state_t state_word_t;
typedef coefc_dsp24_data_t sample_t;
#elif defined(FILTER_KERNEL_float32)
#define K(name) coefc_float32_##name
typedef coefc_float32_state_t state_word_t;
typedef coefc_float32_data_t sample_t;
#else
#error "define FILTER_KERNEL_<target>"
#endif

#define BLOCK 32

static state_word_t axial_state[PROBE_FRONT_END_AXIAL_STATE_WORDS];
static state_word_t radial_state[PROBE_FRONT_END_RADIAL_STATE_WORDS];

/* Called once per block of BLOCK samples per channel, in place. */
static void on_block(sample_t *axial, sample_t *radial)
{
    K(process)(&probe_front_end_axial, axial_state, axial, axial, BLOCK);
    K(process)(&probe_front_end_radial, radial_state, radial, radial, BLOCK);
}

static int selftest(void)
{
    static state_word_t scratch[PROBE_FRONT_END_MAX_STATE_WORDS];
    int c, failed = 0;
    for (c = 0; c < PROBE_FRONT_END_N_CHANNELS; c++) {
        long at = K(selftest)(probe_front_end_channels[c], scratch, probe_front_end_golden_in,
                              probe_front_end_golden_out[c], PROBE_FRONT_END_GOLDEN_LEN);
        if (at >= 0) {
            printf("channel %s: golden vectors differ at sample %ld\n", probe_front_end_channel_names[c], at);
            failed = 1;
        } else {
            printf("channel %s: %d golden samples bit-exact\n", probe_front_end_channel_names[c],
                   PROBE_FRONT_END_GOLDEN_LEN);
        }
    }
    return failed;
}

int main(int argc, char **argv)
{
    sample_t a[BLOCK], r[BLOCK];
    if (argc > 1 && strcmp(argv[1], "--selftest") == 0) {
        return selftest();
    }
    K(reset)(&probe_front_end_axial, axial_state);
    K(reset)(&probe_front_end_radial, radial_state);
    memset(a, 0, sizeof a);
    memset(r, 0, sizeof r);
    on_block(a, r);
    printf("one block of %d samples filtered\n", BLOCK);
    return 0;
}
