"""Porting aids: golden vectors, their files, the port checker, the firmware cost, the MISRA check.

``vectors`` (``generate``), ``vector_files`` (write and read a vector set with its
provenance), ``check`` (``check_port``, ``check_log``), ``params_header`` (the generated C
header), ``firmware_cost`` (instructions, flash and RAM on an emulated Cortex-M) and ``misra``
(the MISRA C:2012 check of the firmware C against the deviations in c_ref/PORTING.md).
"""
