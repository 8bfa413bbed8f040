/*
 * Firmware-style use of coefc's generated code: per-channel state, a block
 * callback as an audio or sensor DMA interrupt would call it, and a self test
 * that runs the golden vectors through this very build.  The same source
 * builds for every target: the data word is probe_front_end_data_t.
 */
#include <stdio.h>
#include <string.h>

#include "probe_front_end.h"

#define BLOCK 32

static probe_front_end_axial_state_t axial_state;
static probe_front_end_radial_state_t radial_state;

/* Called once per block of BLOCK samples per channel, in place. */
static void on_block(probe_front_end_data_t *axial, probe_front_end_data_t *radial)
{
    probe_front_end_axial_process(&axial_state, axial, axial, BLOCK);
    probe_front_end_radial_process(&radial_state, radial, radial, BLOCK);
}

int main(int argc, char **argv)
{
    probe_front_end_data_t a[BLOCK], r[BLOCK];
    if (argc > 1 && strcmp(argv[1], "--selftest") == 0) {
        int bad = probe_front_end_selftest();
        printf("%d channels, %d golden samples each: %s\n", PROBE_FRONT_END_N_CHANNELS,
               PROBE_FRONT_END_GOLDEN_LEN, bad ? "MISMATCH" : "bit-exact");
        return bad != 0;
    }
    probe_front_end_axial_reset(&axial_state);
    probe_front_end_radial_reset(&radial_state);
    memset(a, 0, sizeof a);
    memset(r, 0, sizeof r);
    on_block(a, r);
    printf("one block of %d samples filtered\n", BLOCK);
    return 0;
}
