/*
 * Minimal RV32 start-up for linedrop's test images: stack pointer and trap
 * vector, .data/.tdata copy, .bss/.tbss clear, the thread pointer for
 * picolibc's thread-local errno, then main(argc, argv) and exit() through
 * picolibc's semihosting library. The arguments come from the host's
 * semihosting command line (QEMU: -semihosting-config enable=on,arg=prog,arg=file).
 *
 * Machine mode only; any trap (illegal instruction, access fault) ends the
 * run with a distinctive status instead of looping.
 */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

extern char __data_load[], __data_start[], __data_end[];
extern char __bss_start[], __bss_end[];
extern char __tls_base[];

#define LD_ARGV_MAX 8
#define LD_CMDLINE_MAX 256

int main(int argc, char **argv);
int sys_semihost_get_cmdline(char *buf, int size);
void _set_tls(void *tls);
void ld_reset_handler(void);

/* Reset lands on _start (first in FLASH); a trap on ld_trap (mtvec, 4-byte aligned), which
 * exits with status 70. */
__asm__(".section .text.ld_start, \"ax\", @progbits\n"
        ".global _start\n"
        "_start:\n"
        "    la sp, __stack_top\n"
        "    la t0, ld_trap\n"
        ".option push\n"
        ".option arch, +zicsr\n"
        "    csrw mtvec, t0\n"
        ".option pop\n"
        "    j ld_reset_handler\n"
        ".balign 4\n"
        "ld_trap:\n"
        "    la sp, __stack_top\n"
        "    li a0, 70\n"
        "    j _exit\n"
        ".text\n");

/* Split the host's command line at spaces into argv (no quoting). */
static int ld_args(char **argv)
{
    static char line[LD_CMDLINE_MAX];
    int argc = 0;
    char *word;

    if (sys_semihost_get_cmdline(line, LD_CMDLINE_MAX) != 0) {
        line[0] = '\0';
    }
    for (word = strtok(line, " "); word != NULL && argc < LD_ARGV_MAX; word = strtok(NULL, " ")) {
        argv[argc++] = word;
    }
    argv[argc] = NULL;
    return argc;
}

void ld_reset_handler(void)
{
    static char *argv[LD_ARGV_MAX + 1];
    int argc;

    memcpy(__data_start, __data_load, (size_t)(__data_end - __data_start));
    memset(__bss_start, 0, (size_t)(__bss_end - __bss_start));
    _set_tls(__tls_base);
    argc = ld_args(argv);
    exit(main(argc, argv));
}
