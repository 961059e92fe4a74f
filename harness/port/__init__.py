"""Porting aids: golden vectors, their files, the port checker and the firmware cost.

``vectors`` (``generate``), ``vector_files`` (write and read a vector set with its
provenance), ``check`` (``check_port``, ``check_log``), ``params_header`` (the generated C
header) and ``firmware_cost`` (instructions, flash and RAM on an emulated Cortex-M).
"""
