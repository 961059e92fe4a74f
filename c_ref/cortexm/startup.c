/*
 * Minimal Cortex-M start-up for linedrop's test images: a vector table with
 * the initial stack pointer and reset handler, .data copy, .bss clear,
 * newlib semihosting set-up, then main() and exit() through semihosting.
 *
 * Works unchanged on ARMv6-M (Cortex-M0/M0+) and ARMv7E-M (Cortex-M4).
 */
#include <stdint.h>
#include <stdlib.h>

extern uint32_t __data_load[], __data_start[], __data_end[];
extern uint32_t __bss_start__[], __bss_end__[];
extern uint32_t __stack_top[];

int main(void);
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

void ld_reset_handler(void)
{
    uint32_t *src = __data_load;
    uint32_t *dst;

    for (dst = __data_start; dst < __data_end; dst++) {
        *dst = *src++;
    }
    for (dst = __bss_start__; dst < __bss_end__; dst++) {
        *dst = 0u;
    }
    initialise_monitor_handles();
    exit(main());
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
