/*
 * Semihosting vector runner: replays ADC samples through ld_step on the target
 * and writes the state after every step, for bit-exact comparison on the host.
 *
 * Reads "linedrop_in.bin" and writes "linedrop_out.bin" in the host's working
 * directory (newlib semihosting file I/O). Both are little-endian binary:
 *
 *   in:  "LDV1", u32 sizeof(ld_params_t), u32 sizeof(ld_state_t), u32 n_cases,
 *        then per case: the ld_params_t bytes, u32 n_samples, n_samples x (u16 v, u16 i)
 *   out: "LDS1", then per case: the ld_state_t bytes after ld_init, then after each step
 *
 * The struct bytes are the target's own layout; the host packs and unpacks them
 * from the image's DWARF (harness/cortexm_emu.py), so no field list lives here.
 * Exit status: 0 on success, 2 on a size mismatch, 3 on an I/O error, 4 if a
 * returned command differs from the state's cmd field.
 */
#include <stdio.h>
#include <string.h>
#include "linedrop.h"

static int ld_read_u32(FILE *f, uint32_t *x)
{
    uint8_t b[4];
    if (fread(b, 1, 4, f) != 4u) {
        return 0;
    }
    *x = (uint32_t)b[0] | ((uint32_t)b[1] << 8) | ((uint32_t)b[2] << 16) | ((uint32_t)b[3] << 24);
    return 1;
}

static int ld_run_case(FILE *in, FILE *out)
{
    static ld_params_t p;
    static ld_state_t s;
    uint32_t n, k;
    uint8_t b[4];

    if (fread(&p, sizeof p, 1, in) != 1u || !ld_read_u32(in, &n)) {
        return 3;
    }
    ld_init(&p, &s);
    if (fwrite(&s, sizeof s, 1, out) != 1u) {
        return 3;
    }
    for (k = 0; k < n; k++) {
        uint16_t cmd;
        if (fread(b, 1, 4, in) != 4u) {
            return 3;
        }
        cmd = ld_step(&p, &s, (uint16_t)(b[0] | (b[1] << 8)), (uint16_t)(b[2] | (b[3] << 8)));
        if (cmd != s.cmd) {
            return 4;
        }
        if (fwrite(&s, sizeof s, 1, out) != 1u) {
            return 3;
        }
    }
    return 0;
}

int main(void)
{
    FILE *in = fopen("linedrop_in.bin", "rb");
    FILE *out = fopen("linedrop_out.bin", "wb");
    char magic[4];
    uint32_t psize, ssize, n_cases, c;
    int rc = 0;

    if (in == NULL || out == NULL) {
        return 3;
    }
    if (fread(magic, 1, 4, in) != 4u || memcmp(magic, "LDV1", 4) != 0 ||
        !ld_read_u32(in, &psize) || !ld_read_u32(in, &ssize) || !ld_read_u32(in, &n_cases)) {
        return 3;
    }
    if (psize != sizeof(ld_params_t) || ssize != sizeof(ld_state_t)) {
        return 2;
    }
    fwrite("LDS1", 1, 4, out);
    for (c = 0; c < n_cases && rc == 0; c++) {
        rc = ld_run_case(in, out);
    }
    if (fclose(out) != 0) {
        rc = 3;
    }
    fclose(in);
    return rc;
}
