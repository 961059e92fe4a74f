/*
 * Minimal Cortex-M start-up for linedrop's test images: a vector table with
 * the initial stack pointer and reset handler, .data copy, .bss clear,
 * newlib semihosting set-up, then main(argc, argv) and exit() through
 * semihosting. The arguments come from the host's semihosting command line
 * (QEMU: -semihosting-config enable=on,arg=prog,arg=file).
 *
 * Works unchanged on ARMv6-M (Cortex-M0/M0+) and ARMv7E-M (Cortex-M4).
 */
#include <stdint.h>
#include <stddef.h>
#include <stdlib.h>

extern uint32_t __data_load[], __data_start[], __data_end[];
extern uint32_t __bss_start__[], __bss_end__[];
extern uint32_t __stack_top[];

#define LD_ARGV_MAX 8
#define LD_CMDLINE_MAX 256
#define LD_SYS_GET_CMDLINE 0x15

int main(int argc, char **argv);
void initialise_monitor_handles(void);
void ld_reset_handler(void);
void ld_fault_handler(void);
void _init(void);
void _fini(void);

/* C needs no constructors; exit() still calls these through newlib. */
void _init(void)
{
}

void _fini(void)
{
}

/* A fault ends the run with a distinctive status instead of hanging QEMU. */
void ld_fault_handler(void)
{
    _Exit(70);
}

/* One semihosting call: operation in r0, parameter block in r1, result in r0. */
static int ld_semihost(int op, void *arg)
{
    register int r0 __asm__("r0") = op;
    register void *r1 __asm__("r1") = arg;
    __asm__ volatile("bkpt 0xab" : "+r"(r0) : "r"(r1) : "memory");
    return r0;
}

/* Split the host's command line at spaces into argv (no quoting). */
static int ld_args(char **argv)
{
    static char line[LD_CMDLINE_MAX];
    struct {
        char *buf;
        int len;
    } block = {line, LD_CMDLINE_MAX - 1};
    char *c = line;
    int argc = 0;

    if (ld_semihost(LD_SYS_GET_CMDLINE, &block) != 0) {
        line[0] = '\0';
    }
    while (*c != '\0' && argc < LD_ARGV_MAX) {
        while (*c == ' ') {
            *c++ = '\0';
        }
        if (*c != '\0') {
            argv[argc++] = c;
        }
        while (*c != '\0' && *c != ' ') {
            c++;
        }
    }
    argv[argc] = NULL;
    return argc;
}

void ld_reset_handler(void)
{
    static char *argv[LD_ARGV_MAX + 1];
    int argc;
    uint32_t *src = __data_load;
    uint32_t *dst;

    for (dst = __data_start; dst < __data_end; dst++) {
        *dst = *src++;
    }
    for (dst = __bss_start__; dst < __bss_end__; dst++) {
        *dst = 0u;
    }
    initialise_monitor_handles();
    argc = ld_args(argv);
    exit(main(argc, argv));
}

/* Initial SP, reset, NMI, HardFault, MemManage, BusFault, UsageFault. */
__attribute__((section(".vectors"), used))
static void (*const ld_vectors[7])(void) = {
    (void (*)(void))(uintptr_t)__stack_top,
    ld_reset_handler,
    ld_fault_handler,
    ld_fault_handler,
    ld_fault_handler,
    ld_fault_handler,
    ld_fault_handler,
};
